"""Sampler coordinates: the logit map of bounded priors, its Jacobian, and a posterior piled against a bound."""
import numpy as np
import pytest
from scipy import stats

from retrieve.inference import fit, parse_config
from retrieve.inference.checkpoint import read_checkpoint
from retrieve.inference.coordinates import Coordinates, SamplerSpace
from retrieve.inference.priors import Gaussian, LogUniform, TruncatedGaussian, Uniform
from retrieve.inference.toymodel import LinearModelFactory
from linear_case import ALPHA, SIGMA, X, write_linear_data

PRIORS = [Uniform(3.0, 5.5), Gaussian(0.0, 2.0), LogUniform(1e-3, 10.0), TruncatedGaussian(1.0, 0.5, 0.0, 3.0)]


def test_bounded_priors_are_mapped_and_gaussian_ones_are_not():
    c = Coordinates(PRIORS, "unbounded")
    assert list(c.mapped) == [0, 2, 3]
    assert Coordinates(PRIORS, "physical").identity
    x = np.array([[3.2, -7.0, 0.5, 2.9], [5.4, 1.0, 1e-3 * 1.0001, 0.1]])
    y = c.to_sampler(x)
    assert np.array_equal(y[:, 1], x[:, 1])                     # Gaussian prior: y = x
    np.testing.assert_allclose(c.to_physical(y), x, rtol=1e-12)
    # the whole real line lands inside the support
    wild = np.array([[-300.0, 5.0, 300.0, -1e6]])
    inside = c.to_physical(wild)[0]
    assert 3.0 <= inside[0] <= 5.5 and 1e-3 <= inside[2] <= 10.0 and 0.0 <= inside[3] <= 3.0


def test_log_jacobian_matches_a_numerical_derivative():
    c = Coordinates(PRIORS, "unbounded")
    y0 = np.array([0.3, -1.0, -2.5, 4.0])
    h = 1e-6
    dx = [(c.to_physical(y0 + h * e)[i] - c.to_physical(y0 - h * e)[i]) / (2 * h)
          for i, e in zip(range(4), np.eye(4))]
    assert c.log_jacobian(y0) == pytest.approx(np.sum(np.log(np.abs(dx))), rel=1e-8)
    assert c.log_jacobian(np.array([[0.0, 0.0, 0.0, 0.0]])).shape == (1,)
    # at y = 0 each mapped factor is width / 4 (the logistic's slope there)
    assert c.log_jacobian(np.zeros(4)) == pytest.approx(np.log(2.5 / 4) + np.log(9.999 / 4) + np.log(3.0 / 4))


def test_sampler_space_adds_the_jacobian_and_keeps_minus_infinity():
    class Evaluator:
        def evaluate(self, points):
            return np.array([-np.inf if p[1] > 10 else -0.5 * float(p @ p) for p in points])
    space = SamplerSpace(Evaluator(), Coordinates(PRIORS, "unbounded"))
    y = np.array([[0.1, 0.2, 0.3, 0.4], [0.1, 20.0, 0.3, 0.4]])
    lp = np.array(space.map(None, y))
    x = space.coordinates.to_physical(y)
    assert lp[0] == pytest.approx(-0.5 * x[0] @ x[0] + space.coordinates.log_jacobian(y[0]))
    assert lp[1] == -np.inf
    assert space.physical_log_prob(y[:1], lp[:1])[0] == pytest.approx(-0.5 * x[0] @ x[0])


# --------------------------------------------------------------------------- a posterior at a prior bound
@pytest.fixture(scope="module")
def linear_data(tmp_path_factory):
    path = tmp_path_factory.mktemp("lin") / "lin.ecsv"
    return path, write_linear_data(path, seed=7)


def _gaussian_part(y):
    """Mean and covariance of the straight-line fit c0 + c1 (λ − 1) with c0 flat and c1 ~ N(0, 1/α).

    Bishop (2006), *Pattern Recognition and Machine Learning*, eqs. 3.53–3.54 with the prior
    precision diag(0, α): a uniform prior on c0 wide enough not to matter except at its bounds.
    """
    phi = np.vander(X - 1.0, 2, increasing=True)
    beta = 1 / SIGMA ** 2
    s_n = np.linalg.inv(np.diag([0.0, ALPHA]) + beta * phi.T @ phi)
    return beta * s_n @ phi.T @ y, s_n


def _bounded_config(path, m0, sd0, **sampler):
    low, high = m0 - 0.3 * sd0, m0 + 20 * sd0      # the posterior's mode sits just outside the support
    return parse_config({
        "parameters": {"coef_0": {"prior": "uniform", "low": float(low), "high": float(high)},
                       "coef_1": {"prior": "gaussian", "mean": 0.0, "sigma": float(1 / np.sqrt(ALPHA))}},
        "datasets": [{"name": "ifs", "file": str(path)}],
        "sampler": {"max_steps": 12000, "check_every": 500, "seed": 2, "progress": False,
                    "coordinates": "unbounded", **sampler}}), (low, high)


def test_unbounded_coordinates_sample_a_posterior_truncated_by_its_prior(linear_data, tmp_path):
    path, y = linear_data
    m, s_n = _gaussian_part(y)
    sd0 = float(np.sqrt(s_n[0, 0]))
    cfg, (low, high) = _bounded_config(path, m[0], sd0)
    res = fit(cfg, out_dir=tmp_path / "run", model_factory=LinearModelFactory(2))
    assert res.converged
    c0, c1 = res.samples["coef_0"], res.samples["coef_1"]
    assert c0.min() >= low and c0.max() <= high               # the chain is stored in physical coordinates
    # c0's marginal is the Gaussian marginal truncated to the prior (scipy.stats.truncnorm), and
    # c1 follows through the Gaussian conditional mean, linear in c0
    ref = stats.truncnorm((low - m[0]) / sd0, (high - m[0]) / sd0, loc=m[0], scale=sd0)
    n_eff = (res.n_steps - res.burn_in) * res.n_walkers / np.max(res.tau)
    assert abs(c0.mean() - ref.mean()) < 4 * ref.std() / np.sqrt(n_eff)
    assert c0.std() == pytest.approx(ref.std(), rel=4 * np.sqrt(2 / n_eff))
    mean_c1 = m[1] + s_n[1, 0] / s_n[0, 0] * (ref.mean() - m[0])
    sd_c1 = np.sqrt(s_n[1, 1] - s_n[1, 0] ** 2 / s_n[0, 0] + (s_n[1, 0] / s_n[0, 0]) ** 2 * ref.var())
    assert abs(c1.mean() - mean_c1) < 4 * sd_c1 / np.sqrt(n_eff)
    # the walkers never propose beyond the bound, so no proposal is lost there
    ck = read_checkpoint(tmp_path / "run" / "chain.h5")
    assert ck.walker_positions is not None and np.all(np.isfinite(ck.walker_log_prob))


def test_unbounded_resume_reproduces_the_uninterrupted_chain(linear_data, tmp_path):
    path, y = linear_data
    m, s_n = _gaussian_part(y)
    factory = LinearModelFactory(2)
    cfg = lambda n: _bounded_config(path, m[0], float(np.sqrt(s_n[0, 0])), max_steps=n, check_every=300)[0]  # noqa: E731
    fit(cfg(900), out_dir=tmp_path / "full", model_factory=factory)
    fit(cfg(300), out_dir=tmp_path / "part", model_factory=factory)
    fit(cfg(900), out_dir=tmp_path / "part", resume=True, model_factory=factory)
    full, part = (read_checkpoint(tmp_path / d / "chain.h5") for d in ("full", "part"))
    assert np.array_equal(full.chain, part.chain)
    assert np.array_equal(full.log_prob, part.log_prob)
    assert np.array_equal(full.walker_positions, part.walker_positions)
