"""Gaussian likelihood, noise kernels, caching, failure counting, pickling."""
import math
import pickle

import numpy as np
import pytest
from scipy import stats

from retrieve.inference.likelihood import LogPosterior
from retrieve.inference.noise import NoiseModel
from retrieve.inference.priors import Uniform
from retrieve.inference.toymodel import LinearModelFactory
from retrieve.observations import Dataset, ObjectData

RNG = np.random.default_rng(5)
LAM = np.linspace(1.0, 1.8, 12)
SIG = 0.05 + 0.02 * RNG.random(12)
R = RNG.normal(0.0, 0.07, 12)


def _mvn(cov):
    return stats.multivariate_normal(mean=np.zeros(len(cov)), cov=cov).logpdf(R)


def test_diagonal_matches_multivariate_normal():
    nm = NoiseModel(LAM, SIG ** 2)
    # reference: scipy.stats.multivariate_normal.logpdf
    np.testing.assert_allclose(nm.log_likelihood(R), _mvn(np.diag(SIG ** 2)), rtol=1e-12)


def test_full_covariance_matches_multivariate_normal_and_is_factorised_once():
    a = RNG.normal(size=(12, 12))
    cov = 0.003 * (a @ a.T / 12 + np.eye(12))
    nm = NoiseModel(LAM, np.diag(cov), covariance=cov)
    # reference: scipy.stats.multivariate_normal.logpdf
    np.testing.assert_allclose(nm.log_likelihood(R), _mvn(cov), rtol=1e-10)
    for _ in range(5):
        nm.log_likelihood(R)
    assert nm.n_factorisations == 1


def test_inflation_adds_a_constant_variance():
    nm = NoiseModel(LAM, SIG ** 2, inflate=True)
    # σ² → σ² + 10^b, reference: scipy.stats.multivariate_normal.logpdf
    np.testing.assert_allclose(nm.log_likelihood(R, log_inflate=-2.5),
                               _mvn(np.diag(SIG ** 2 + 10 ** -2.5)), rtol=1e-12)


def test_correlated_kernel_is_greco_brandt_form_and_cached():
    nm = NoiseModel(LAM, SIG ** 2, correlated=True)
    amp, ell = 0.6, 0.15
    # Greco & Brandt (2016, ApJ 833, 134) eq. 2: C_ij = σ_i σ_j [A exp(-Δλ²/2ℓ²) + (1−A) δ_ij]
    dl = LAM[:, None] - LAM[None, :]
    expected = SIG[:, None] * SIG[None, :] * (amp * np.exp(-0.5 * dl ** 2 / ell ** 2) + (1 - amp) * np.eye(12))
    np.testing.assert_allclose(nm.covariance_matrix(gp_amp=amp, gp_length_um=ell), expected, rtol=1e-14)
    np.testing.assert_allclose(nm.log_likelihood(R, gp_amp=amp, gp_length_um=ell), _mvn(expected), rtol=1e-10)
    nm.log_likelihood(R, gp_amp=amp, gp_length_um=ell)
    assert nm.n_factorisations == 1          # same hyperparameters: cache hit
    nm.log_likelihood(R, gp_amp=0.5, gp_length_um=ell)
    assert nm.n_factorisations == 2          # new values: refactorised


def _posterior(fail_above=None, noise=None, fixed=None, free=None):
    y = 1.0 + 0.5 * (LAM - 1.0)
    ds = Dataset("ifs", "spectrum", LAM, y + R, SIG)
    free = free or {"coef_0": Uniform(-5, 5), "coef_1": Uniform(-5, 5)}
    return LogPosterior(LinearModelFactory(2, fail_above=fail_above), ObjectData("toy", [ds]), free,
                        fixed=fixed, noise=noise)


def test_posterior_is_prior_plus_likelihood_with_scale_factor():
    post = _posterior(noise={"ifs": (True, False, False)},
                      free={"coef_0": Uniform(-5, 5), "coef_1": Uniform(-5, 5), "scale_ifs": Uniform(0.5, 1.5)})
    theta = [1.1, 0.4, 0.9]
    model = 0.9 * (1.1 + 0.4 * (LAM - 1.0))
    data = 1.0 + 0.5 * (LAM - 1.0) + R
    # ln p = Σ ln prior + ln N(d − s·m; 0, diag σ²); reference: scipy.stats.norm / uniform
    expected = (np.sum(stats.norm(model, SIG).logpdf(data)) + 2 * stats.uniform(-5, 10).logpdf(0)
                + stats.uniform(0.5, 1.0).logpdf(0.9))
    np.testing.assert_allclose(post(theta), expected, rtol=1e-12)
    assert post([9.0, 0.0, 1.0]) == -math.inf   # outside the prior: no model call
    assert post.n_evaluations == 1


def test_failures_give_minus_inf_and_are_counted():
    post = _posterior(fail_above=2.0)
    assert post([3.0, 0.0]) == -math.inf
    assert post([3.5, 0.0]) == -math.inf
    assert np.isfinite(post([1.0, 0.0]))
    assert post.failures == {"toy failure region": 2}


class _NaNModel:
    parameter_names = ["coef_0"]

    def evaluate(self, params):
        from types import SimpleNamespace
        return SimpleNamespace(per_dataset={"ifs": np.full(LAM.size, np.nan)})


def _nan_factory(object_data):
    return _NaNModel()


def test_non_finite_model_is_counted_not_raised():
    ds = Dataset("ifs", "spectrum", LAM, R, SIG)
    post = LogPosterior(_nan_factory, ObjectData("t", [ds]), {"coef_0": Uniform(0, 1)})
    assert post([0.5]) == -math.inf
    assert post.failures == {"non-finite model flux": 1}


def test_posterior_pickles_without_its_model():
    post = _posterior()
    value = post([1.0, 0.3])
    clone = pickle.loads(pickle.dumps(post))
    assert clone._model is None
    assert clone([1.0, 0.3]) == value


def test_spectrum_and_photometry_terms_add():
    wl_phot = np.array([1.25, 1.65, 2.16])
    spec = Dataset("ifs", "spectrum", LAM, 1.0 + R, SIG)
    phot = Dataset("phot", "photometry", wl_phot, np.array([1.1, 1.4, 1.5]), np.array([0.05, 0.05, 0.08]),
                   filters=["twomass-J", "twomass-H", "twomass-Ks"])
    post = LogPosterior(LinearModelFactory(2), ObjectData("t", [spec, phot]),
                        {"coef_0": Uniform(-5, 5), "coef_1": Uniform(-5, 5)}, noise={"phot": (True, False, False)},
                        fixed={"scale_phot": 1.2})
    c0, c1 = 1.0, 0.6
    ll = post.log_likelihood(post.params([c0, c1]))
    # independent datasets: ln L = Σ_datasets Σ_points ln N(d; s·m, σ) (reference: scipy.stats.norm)
    expected = (np.sum(stats.norm(c0 + c1 * (LAM - 1), SIG).logpdf(spec.flux))
                + np.sum(stats.norm(1.2 * (c0 + c1 * (wl_phot - 1)), phot.uncertainty).logpdf(phot.flux)))
    np.testing.assert_allclose(ll, expected, rtol=1e-12)


def test_correlated_kernel_with_a_full_covariance_is_a_one_line_config_error():
    from retrieve.errors import ConfigError
    from retrieve.inference.likelihood import DatasetTerm

    wl = np.linspace(1.0, 1.5, 4)
    ds = Dataset("ifs", "spectrum", wl, np.ones(4), np.full(4, 0.1), covariance=np.eye(4) * 0.01,
                 source="spec.ecsv")
    with pytest.raises(ConfigError) as err:
        DatasetTerm(ds, correlated=True)
    message = str(err.value)
    assert message.startswith("spec.ecsv: dataset 'ifs'") and "\n" not in message
    DatasetTerm(ds, correlated=False)   # the covariance alone is fine
