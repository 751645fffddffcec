"""Walker start and τ discard: Laplace (Hessian) ball, eigenvalue floor, optimiser polish, start-up discard."""
import numpy as np

from retrieve.inference.convergence import ConvergenceRule, autocorr_time, tau_discard
from retrieve.inference.priors import Uniform
from retrieve.inference.sampler import (EvaluationMap, SamplerSettings, find_maximum, initial_ball,
                                        laplace_covariance, prior_bounds)

MEAN = np.array([0.3, -1.0, 2.0])
COV = np.array([[0.04, 0.018, 0.0],
                [0.018, 0.09, -0.012],
                [0.0, -0.012, 0.01]])
PRIORS = [Uniform(-3.0, 3.0), Uniform(-5.0, 3.0), Uniform(0.0, 4.0)]


class Gaussian3:
    """ln p of N(MEAN, COV) inside the uniform priors, −∞ outside (analytic posterior)."""

    priors = PRIORS
    ndim = 3

    def __init__(self, mean=MEAN, cov=COV):
        self.mean, self.prec = np.asarray(mean, float), np.linalg.inv(cov)

    def evaluate(self, theta):
        theta = np.asarray(theta, float)
        b = prior_bounds(self.priors)
        if np.any(theta < b[:, 0]) or np.any(theta > b[:, 1]):
            return -np.inf, ""
        d = theta - self.mean
        return -0.5 * d @ self.prec @ d, ""


def test_laplace_covariance_of_a_gaussian_is_its_covariance():
    # ln p is quadratic, so central differences give the exact Hessian (up to rounding);
    # Laplace approximation of a Gaussian is the Gaussian itself (textbook, e.g. MacKay 2003 ch. 27)
    post = Gaussian3()
    cov = laplace_covariance(EvaluationMap(post), MEAN, prior_bounds(PRIORS))
    np.testing.assert_allclose(cov, COV, rtol=1e-5, atol=1e-7)


def test_hessian_ball_covariance_matches_the_gaussian_within_mc_error():
    post = Gaussian3()
    ev = EvaluationMap(post)
    cov = laplace_covariance(ev, MEAN, prior_bounds(PRIORS))
    n = 4000
    pos, lp = initial_ball(MEAN, PRIORS, n, 1e-3, np.random.default_rng(3), ev, covariance=cov)
    assert np.all(np.isfinite(lp))
    sd = np.sqrt(np.diag(COV))
    # standard error of a sample mean σ/√n and of a sample variance σ²√(2/n) (normal theory, common practice)
    np.testing.assert_allclose(pos.mean(0), MEAN, rtol=0, atol=float(4 * sd.max() / np.sqrt(n)))
    emp = np.cov(pos.T)
    tol = 4 * np.sqrt(2.0 / n) * np.outer(sd, sd)
    assert np.all(np.abs(emp - COV) < tol), (emp, COV)


def test_flat_direction_is_floored_at_the_uniform_prior_width():
    # a parameter the likelihood ignores: σ = width/√12, the sd of a uniform distribution (common practice)
    class Flat(Gaussian3):
        def evaluate(self, theta):
            lp, r = super().evaluate(theta)
            if np.isfinite(lp):
                lp = -0.5 * ((theta[0] - MEAN[0]) ** 2 / COV[0, 0] + (theta[1] - MEAN[1]) ** 2 / COV[1, 1])
            return lp, r
    cov = laplace_covariance(EvaluationMap(Flat()), MEAN, prior_bounds(PRIORS))
    np.testing.assert_allclose(np.sqrt(cov[2, 2]), 4.0 / np.sqrt(12.0), rtol=1e-6)
    np.testing.assert_allclose(np.diag(cov)[:2], np.diag(COV)[:2], rtol=1e-5)


def test_hessian_ball_falls_back_when_the_neighbourhood_is_not_finite():
    class Cliff(Gaussian3):
        def evaluate(self, theta):
            lp, r = super().evaluate(theta)
            return (-np.inf, "cliff") if theta[0] > MEAN[0] else (lp, r)
    assert laplace_covariance(EvaluationMap(Cliff()), MEAN, prior_bounds(PRIORS)) is None


def test_polish_reaches_the_maximum_that_a_short_de_run_misses():
    post = Gaussian3()
    ev = EvaluationMap(post)
    rough = find_maximum(ev, PRIORS, SamplerSettings(optimiser_max_evaluations=60, polish_max_evaluations=0), 5)
    best = find_maximum(ev, PRIORS, SamplerSettings(optimiser_max_evaluations=60), 5)
    assert post.evaluate(best)[0] > post.evaluate(rough)[0]
    # Mahalanobis distance well inside the posterior's 1σ region
    d = best - MEAN
    assert d @ np.linalg.solve(COV, d) < 1e-3


def test_tau_discard_rule():
    assert tau_discard(1000, None) == 500                       # no previous τ: half the chain
    assert tau_discard(1000, np.array([np.nan, np.nan])) == 500
    assert tau_discard(1000, np.array([10.0, 40.5]), 3.0) == 122  # ceil(3 × 40.5)
    assert tau_discard(1000, np.array([10.0, 400.0]), 3.0) == 500  # capped at half


def test_discard_removes_a_start_up_transient_from_tau():
    # AR(1) with φ = 0.9 has τ = (1+φ)/(1−φ) = 19 (textbook, e.g. Sokal 1997);
    # a slow decay from a far start inflates τ of the whole chain, not of the part after the discard
    rng = np.random.default_rng(11)
    n, walkers, phi = 6000, 16, 0.9
    x = np.empty((n, walkers))
    x[0] = 200.0
    for t in range(1, n):
        x[t] = phi * x[t - 1] + rng.standard_normal(walkers) * np.sqrt(1 - phi ** 2)
    x[:300] += np.linspace(60.0, 0.0, 300)[:, None]          # slow drift at the start
    whole = autocorr_time(x[:, :, None])[0]
    d = tau_discard(n, np.array([whole]), 3.0)
    after = autocorr_time(x[d:, :, None])[0]
    assert abs(after - 19.0) < 0.15 * 19.0
    assert whole > 1.3 * after
    rule = ConvergenceRule()
    assert rule.converged(n - d, np.array([after]), np.array([after * 1.005]))


def test_optimiser_stages_show_progress_and_give_the_same_start(capsys):
    post = Gaussian3()
    settings = SamplerSettings(optimiser_max_evaluations=90)       # 90 // (10 × 3) − 1 = 2 generations
    quiet = find_maximum(EvaluationMap(post), PRIORS, settings, 5)
    shown = find_maximum(EvaluationMap(post), PRIORS, settings, 5, progress=True)
    err = capsys.readouterr().err
    assert "optimiser" in err and "2/2" in err and "generation" in err
    assert "polish" in err and "candidate" in err
    assert np.array_equal(quiet, shown)                            # the bars change nothing
