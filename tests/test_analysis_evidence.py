"""Bridge-sampling evidence against closed forms and against nested sampling (dynesty)."""
import math

import numpy as np
import pytest
from scipy import special, stats

from retrieve.analysis.evidence import bridge_sampling, evidence_of_run, nested_sampling_evidence, support_bounds


def _linear_problem(seed=1, n=30, alpha=0.25, beta=100.0):
    """Polynomial regression with isotropic Gaussian prior N(0, alpha^-1 I) and noise precision beta."""
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 1.0, n)
    phi = np.vander(x, 3, increasing=True)
    w_true = np.array([1.0, -2.0, 0.5])
    t = phi @ w_true + rng.standard_normal(n) / math.sqrt(beta)
    return phi, t, alpha, beta


def _bishop_log_evidence(phi, t, alpha, beta):
    """Bishop (2006, PRML) eq. 3.86 with eqs. 3.79-3.84 (E(m_N), A, m_N)."""
    n, m = phi.shape
    a = alpha * np.eye(m) + beta * phi.T @ phi                       # eq. 3.81
    m_n = beta * np.linalg.solve(a, phi.T @ t)                      # eq. 3.84
    e_mn = 0.5 * beta * np.sum((t - phi @ m_n) ** 2) + 0.5 * alpha * m_n @ m_n   # eq. 3.82
    return (0.5 * m * math.log(alpha) + 0.5 * n * math.log(beta) - e_mn
            - 0.5 * np.linalg.slogdet(a)[1] - 0.5 * n * math.log(2 * math.pi)), m_n, np.linalg.inv(a)


def _log_target(phi, t, alpha, beta):
    n, m = phi.shape
    c = 0.5 * m * math.log(alpha / (2 * math.pi)) + 0.5 * n * math.log(beta / (2 * math.pi))

    def f(w):
        r = t - phi @ w
        return c - 0.5 * alpha * w @ w - 0.5 * beta * r @ r
    return f


@pytest.mark.parametrize("proposal", ["normal", "t"])
def test_linear_gaussian_evidence_matches_closed_form(proposal):
    phi, t, alpha, beta = _linear_problem()
    ln_z, m_n, s_n = _bishop_log_evidence(phi, t, alpha, beta)
    # cross-check of the closed form itself: marginal N(t; 0, I/beta + Phi Phi^T / alpha) (Bishop eq. 2.115)
    marginal = stats.multivariate_normal(np.zeros(t.size), np.eye(t.size) / beta + phi @ phi.T / alpha).logpdf(t)
    assert ln_z == pytest.approx(marginal, abs=1e-8)
    samples = np.random.default_rng(7).multivariate_normal(m_n, s_n, size=3000)   # exact posterior (eqs. 3.53-3.54)
    res = bridge_sampling(_log_target(phi, t, alpha, beta), samples, proposal=proposal, seed=11)
    assert res.converged
    assert abs(res.ln_z - ln_z) < 0.1                      # task requirement, closed form from Bishop eq. 3.86
    assert abs(res.ln_z - ln_z) < 4 * res.ln_z_err + 1e-3  # within the quoted error
    assert 0 < res.ln_z_err < 0.05


def test_quoted_error_is_calibrated_over_repeats():
    # the Fruehwirth-Schnatter (2004) error should match the scatter of repeated estimates
    phi, t, alpha, beta = _linear_problem(seed=2)
    ln_z, m_n, s_n = _bishop_log_evidence(phi, t, alpha, beta)
    f = _log_target(phi, t, alpha, beta)
    devs, errs = [], []
    for k in range(20):
        samples = np.random.default_rng(100 + k).multivariate_normal(m_n, s_n, size=800)
        r = bridge_sampling(f, samples, seed=k)
        devs.append(r.ln_z - ln_z)
        errs.append(r.ln_z_err)
    ratio = np.std(devs) / np.mean(errs)
    assert 0.5 < ratio < 2.0, ratio        # common practice, no source: error estimate within a factor 2
    assert abs(np.mean(devs)) < 3 * np.mean(errs) / math.sqrt(20) + 2e-3   # no bias beyond noise


def test_posterior_truncated_at_prior_edge():
    # y_i = theta + noise, theta ~ U(0, 1), data mean below 0: the posterior is a normal truncated at 0.
    # Z = (2 pi s^2)^(-n/2) exp(-S/(2 s^2)) sqrt(2 pi s^2/n) [Phi((1-m) sqrt(n)/s) - Phi(-m sqrt(n)/s)]
    # (Gaussian integral, common practice, no source); theta2 ~ N(0, 1) with y2 ~ N(theta2, 1) adds a factor
    rng = np.random.default_rng(3)
    n, s = 20, 0.5
    y = -0.05 + s * rng.standard_normal(n)
    m, ss = y.mean(), np.sum((y - y.mean()) ** 2)
    lz1 = (-0.5 * n * math.log(2 * math.pi * s * s) - ss / (2 * s * s) + 0.5 * math.log(2 * math.pi * s * s / n)
           + math.log(special.ndtr((1 - m) * math.sqrt(n) / s) - special.ndtr(-m * math.sqrt(n) / s)))
    y2 = 0.7
    lz2 = stats.norm(0.0, math.sqrt(2.0)).logpdf(y2)      # marginal of y2 (Bishop 2006 eq. 2.115)

    def f(theta):
        a, b = theta
        if not 0.0 <= a <= 1.0:
            return -math.inf
        return (np.sum(stats.norm.logpdf(y, a, s)) + stats.norm.logpdf(b) + stats.norm.logpdf(y2, b, 1.0))

    sd = s / math.sqrt(n)
    a_s = stats.truncnorm((0 - m) / sd, (1 - m) / sd, loc=m, scale=sd).rvs(2000, random_state=5)
    b_s = np.random.default_rng(6).normal(y2 / 2, math.sqrt(0.5), 2000)
    res = bridge_sampling(f, np.column_stack([a_s, b_s]), bounds=[(0.0, 1.0), (-np.inf, np.inf)], seed=4)
    assert abs(res.ln_z - (lz1 + lz2)) < 0.1
    assert abs(res.ln_z - (lz1 + lz2)) < 4 * res.ln_z_err + 1e-3
    # a few samples exactly on the bound (a stuck walker) do not break the estimate; outside ones are refused
    stuck = np.column_stack([a_s, b_s])
    stuck[:3, 0] = 0.0
    again = bridge_sampling(f, stuck, bounds=[(0.0, 1.0), (-np.inf, np.inf)], seed=4)
    assert abs(again.ln_z - (lz1 + lz2)) < 4 * again.ln_z_err + 1e-3
    stuck[0, 0] = -0.1
    from retrieve.errors import UserError
    with pytest.raises(UserError, match="outside the prior bounds"):
        bridge_sampling(f, stuck, bounds=[(0.0, 1.0), (-np.inf, np.inf)], seed=4)


def test_evidence_of_run_with_inference_log_posterior():
    # the engine's LogPosterior (normalised priors and likelihood) with its linear toy model gives the
    # closed-form evidence of Bishop (2006) eq. 2.115 (Gaussian prior, Gaussian noise)
    from retrieve.inference.likelihood import LogPosterior
    from retrieve.inference.priors import Gaussian
    from retrieve.inference.toymodel import LinearModelFactory
    from retrieve.observations import Dataset, ObjectData
    rng = np.random.default_rng(8)
    wl = np.linspace(1.0, 2.0, 25)
    sigma = np.full(wl.size, 0.05)
    flux = 1.0 + 0.3 * (wl - 1.0) + sigma * rng.standard_normal(wl.size)
    ds = Dataset("ifs", "spectrum", wl, flux, sigma)
    priors = {"coef_0": Gaussian(1.0, 0.5), "coef_1": Gaussian(0.0, 1.0)}
    post = LogPosterior(LinearModelFactory(2, 1.0), ObjectData("toy", [ds]), priors)
    phi = np.vander(wl - 1.0, 2, increasing=True)
    m0, s0 = np.array([1.0, 0.0]), np.diag([0.25, 1.0])
    ln_z = stats.multivariate_normal(phi @ m0, np.diag(sigma ** 2) + phi @ s0 @ phi.T).logpdf(flux)
    prec = np.linalg.inv(s0) + phi.T @ (phi / sigma[:, None] ** 2)           # Bishop eqs. 3.50-3.51
    cov = np.linalg.inv(prec)
    mean = cov @ (np.linalg.solve(s0, m0) + phi.T @ (flux / sigma ** 2))
    draws = np.random.default_rng(9).multivariate_normal(mean, cov, 2000)
    table = {"coef_0": draws[:, 0], "coef_1": draws[:, 1]}
    log_prob = np.array([post(d) for d in draws])
    res = evidence_of_run(post, table, log_prob=log_prob, seed=1)
    assert abs(res.ln_z - ln_z) < 0.1
    assert support_bounds(post.priors) == [(-np.inf, np.inf)] * 2    # Gaussian priors are unbounded
    # the dynesty cross-check on the same LogPosterior (prior transform = inverse CDFs of the priors)
    pytest.importorskip("dynesty")
    from retrieve.analysis.evidence import nested_evidence_of_run
    nested = nested_evidence_of_run(post, nlive=100, dlogz=0.1, seed=2)
    assert abs(nested.ln_z - ln_z) < 3 * nested.ln_z_err + 0.05


class _Decay:
    """y = A exp(-x / tau) + noise with uniform priors: a non-linear toy problem."""

    lo = np.array([0.0, 0.1])
    hi = np.array([5.0, 3.0])

    def __init__(self, seed=0):
        rng = np.random.default_rng(seed)
        self.x = np.linspace(0.0, 3.0, 15)
        self.sigma = 0.15
        self.y = 2.0 * np.exp(-self.x / 0.8) + self.sigma * rng.standard_normal(self.x.size)
        self.log_prior = -np.sum(np.log(self.hi - self.lo))

    def log_likelihood(self, theta):
        a, tau = theta
        r = self.y - a * np.exp(-self.x / tau)
        return -0.5 * np.sum(r * r) / self.sigma ** 2 - self.x.size * math.log(math.sqrt(2 * math.pi) * self.sigma)

    def log_target(self, theta):
        if np.any(theta < self.lo) or np.any(theta > self.hi):
            return -math.inf
        return self.log_prior + self.log_likelihood(theta)

    def transform(self, u):
        return self.lo + (self.hi - self.lo) * u


@pytest.mark.slow
def test_agrees_with_dynesty_on_nonlinear_problem():
    pytest.importorskip("dynesty")
    import emcee
    prob = _Decay()
    rng = np.random.default_rng(0)
    nw = 16
    p0 = np.array([2.0, 0.8]) + 0.01 * rng.standard_normal((nw, 2))
    sampler = emcee.EnsembleSampler(nw, 2, prob.log_target)
    state = emcee.State(p0, random_state=np.random.RandomState(1).get_state())
    sampler.run_mcmc(state, 1500, progress=False)
    chain = sampler.get_chain(discard=300, thin=5, flat=True)
    lp = sampler.get_log_prob(discard=300, thin=5, flat=True)
    bridge = bridge_sampling(prob.log_target, chain, log_target_values=lp,
                             bounds=list(zip(prob.lo, prob.hi)), seed=2, n_chains=nw)
    nested = nested_sampling_evidence(prob.log_likelihood, prob.transform, 2, nlive=250, dlogz=0.05, seed=3)
    combined = math.hypot(bridge.ln_z_err, nested.ln_z_err)
    # independent estimators (dynesty, Speagle 2020, MNRAS 493, 3132) agree within their quoted errors
    assert abs(bridge.ln_z - nested.ln_z) < 3 * combined, (bridge, nested)
    # brute-force quadrature on a fine grid as a third check (common practice, no source)
    a = np.linspace(prob.lo[0], prob.hi[0], 801)
    tau = np.linspace(prob.lo[1], prob.hi[1], 801)
    model = a[:, None, None] * np.exp(-prob.x[None, None, :] / tau[None, :, None])
    chi2 = np.sum((prob.y - model) ** 2, axis=-1) / prob.sigma ** 2
    grid = prob.log_prior - 0.5 * chi2 - prob.x.size * math.log(math.sqrt(2 * math.pi) * prob.sigma)
    ln_z_grid = special.logsumexp(grid) + math.log((a[1] - a[0]) * (tau[1] - tau[0]))
    assert abs(bridge.ln_z - ln_z_grid) < 0.1
    print(f"bridge {bridge.ln_z:.4f}+-{bridge.ln_z_err:.4f} nested {nested.ln_z:.4f}+-{nested.ln_z_err:.4f} grid {ln_z_grid:.4f}")


def test_mixture_proposal_on_a_bimodal_posterior():
    # target Z [N(mu1, S) + N(mu2, S)] / 2 with Z chosen: ln Z is known exactly (normalised mixture density)
    ln_z = 3.7
    mu1, mu2, cov = np.array([-3.0, 0.0]), np.array([3.0, 1.0]), np.array([[0.5, 0.2], [0.2, 0.4]])
    d1, d2 = stats.multivariate_normal(mu1, cov), stats.multivariate_normal(mu2, cov)
    f = lambda t: ln_z + np.logaddexp(d1.logpdf(t), d2.logpdf(t)) - math.log(2.0)
    rng = np.random.default_rng(21)
    pick = rng.uniform(size=2000) < 0.5
    x = np.where(pick[:, None], rng.multivariate_normal(mu1, cov, 2000), rng.multivariate_normal(mu2, cov, 2000))
    lt = f(x)
    mix = bridge_sampling(f, x, log_target_values=lt, proposal="mixture", seed=3)
    single = bridge_sampling(f, x, log_target_values=lt, proposal="normal", seed=3)
    assert abs(mix.ln_z - ln_z) < 4 * mix.ln_z_err + 1e-3
    assert abs(single.ln_z - ln_z) < 4 * single.ln_z_err + 1e-3      # still consistent, just noisier
    assert mix.ln_z_err < single.ln_z_err / 3
    with pytest.raises(ValueError):
        bridge_sampling(f, x, proposal="bogus")
