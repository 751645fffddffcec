"""Priors: densities, inverse-CDF transforms and sampling against scipy.stats; the registry."""
import numpy as np
import pytest
from scipy import stats

from retrieve.errors import ConfigError
from retrieve.inference import priors as P

X = np.linspace(-3.0, 12.0, 61)


def _cases():
    return [
        (P.Uniform(1.0, 7.0), stats.uniform(loc=1.0, scale=6.0)),
        (P.LogUniform(0.5, 9.0), stats.loguniform(0.5, 9.0)),
        (P.Gaussian(2.0, 1.5), stats.norm(2.0, 1.5)),
        (P.TruncatedGaussian(2.0, 1.5, 0.0, 5.0), stats.truncnorm(-2.0 / 1.5, 3.0 / 1.5, loc=2.0, scale=1.5)),
    ]


@pytest.mark.parametrize("prior,ref", _cases(), ids=lambda x: type(x).__name__)
def test_log_pdf_matches_scipy(prior, ref):
    # reference: scipy.stats frozen distributions (logpdf is -inf outside the support)
    expected = ref.logpdf(X)
    got = prior.log_pdf(X)
    finite = np.isfinite(expected)
    assert np.array_equal(np.isfinite(got), finite)
    np.testing.assert_allclose(got[finite], expected[finite], rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("prior,ref", _cases(), ids=lambda x: type(x).__name__)
def test_transform_is_inverse_cdf(prior, ref):
    u = np.linspace(0.01, 0.99, 25)
    # reference: scipy.stats ppf (inverse CDF)
    np.testing.assert_allclose(prior.transform(u), ref.ppf(u), rtol=1e-10)


@pytest.mark.parametrize("prior,ref", _cases(), ids=lambda x: type(x).__name__)
def test_sample_follows_distribution(prior, ref):
    draws = prior.sample(np.random.default_rng(11), 4000)
    # Kolmogorov–Smirnov test against the scipy CDF (scipy.stats.kstest); p > 1e-3 for a correct sampler
    assert stats.kstest(draws, ref.cdf).pvalue > 1e-3
    assert np.all(np.isfinite(prior.log_pdf(draws)))   # every draw inside the support


def test_bounds_hold_nearly_all_mass_of_a_gaussian():
    g = P.Gaussian(0.0, 2.0)
    lo, hi = g.bounds
    # scipy.stats.norm: mass outside the bounds equals the 2 × 1e-6 tail fraction chosen in priors._TAIL
    np.testing.assert_allclose(stats.norm(0, 2).cdf(lo) + stats.norm(0, 2).sf(hi), 2e-6, rtol=1e-6)


def test_from_mapping_and_round_trip():
    p = P.prior_from_mapping({"prior": "truncated-gaussian", "mean": 1, "sigma": 2, "low": 0, "high": 3}, "f [parameters] x")
    assert p == P.prior_from_mapping(p.to_dict(), "again")
    assert isinstance(p, P.TruncatedGaussian)


@pytest.mark.parametrize("mapping,message", [
    ({"prior": "uniform", "low": 5.0, "high": 1.0}, "inverted or empty bounds"),
    ({"prior": "unifrom", "low": 0.0, "high": 1.0}, "did you mean 'uniform'"),
    ({"prior": "uniform", "low": 0.0}, "missing required key 'high'"),
    ({"prior": "uniform", "low": 0.0, "high": "1"}, "must be int/float"),
    ({"prior": "gaussian", "mean": 0.0, "sigma": -1.0}, "sigma must be > 0"),
    ({"prior": "log-uniform", "low": 0.0, "high": 1.0}, "needs low > 0"),
    ({"prior": "gaussian", "mean": 0.0, "sigma": 1.0, "sigm": 2}, "unknown key 'sigm'"),
])
def test_bad_prior_tables_are_one_line_config_errors(mapping, message):
    with pytest.raises(ConfigError) as err:
        P.prior_from_mapping(mapping, "fit.toml [parameters] log_g")
    assert message in str(err.value) and "fit.toml [parameters] log_g" in str(err.value)
    assert "\n" not in str(err.value)


def test_registry_accepts_a_new_prior():
    @P.register_prior
    class Exponential(P.Prior):
        name = "test-exponential"
        keys = ("scale",)

        def __init__(self, scale):
            self.scale = scale

        def log_pdf(self, x):
            x = np.asarray(x, float)
            return np.where(x >= 0, -x / self.scale - np.log(self.scale), -np.inf)[()]

        def transform(self, u):
            return -self.scale * np.log1p(-np.asarray(u, float))

        @property
        def bounds(self):
            return 0.0, float(self.transform(1 - 1e-6))

    try:
        p = P.prior_from_mapping({"prior": "test-exponential", "scale": 2.0}, "w")
        # reference: scipy.stats.expon
        np.testing.assert_allclose(p.log_pdf(1.3), stats.expon(scale=2.0).logpdf(1.3), rtol=1e-12)
    finally:
        P.PRIORS.pop("test-exponential")
