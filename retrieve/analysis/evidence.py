"""Bayesian evidence from posterior samples: bridge sampling, and nested sampling as a cross-check.

emcee gives samples of p(θ|d) ∝ q(θ) = π(θ) L(θ) but not the normalising
constant Z = ∫ q(θ) dθ.  :func:`bridge_sampling` estimates it from those
samples, following Gronau et al. (2017, J. Math. Psych. 81, 80):

1. parameters with bounded support are mapped to the real line (logit for
   two bounds, log for one; the Jacobian is added to ln q), so a Gaussian
   proposal fits posteriors that pile up against a prior edge;
2. the samples are split at random into two halves; the first half fixes
   the proposal g (multivariate normal, or Student t for heavier tails,
   with the sample mean and covariance; or a Gaussian mixture fitted by EM
   for multimodal posteriors);
3. N₂ draws from g are evaluated with q; with the second half's N₁ posterior
   samples, the iterative scheme of Meng & Wong (1996, Stat. Sin. 6, 831,
   eq. 4.1) with the optimal bridge function gives

       r⁽ᵗ⁺¹⁾ = [ (1/N₂) Σᵢ l₂ᵢ / (s₁ l₂ᵢ + s₂ r⁽ᵗ⁾) ] / [ (1/N₁) Σⱼ 1 / (s₁ l₁ⱼ + s₂ r⁽ᵗ⁾) ],

   with lₖ = q/g at the proposal (2) and posterior (1) points and
   sₖ = Nₖ / (N₁ + N₂); r converges to Z.  Everything is done in log space.
4. The relative mean-squared error follows Frühwirth-Schnatter (2004,
   Econom. J. 7, 143), as used by Gronau et al. (2017, eq. 17):

       RE² = V_g(f₁) / (N₂ E_g(f₁)²) + τ_f₂ V_p(f₂) / (N₁ E_p(f₂)²),

   f₁ = p/(s₁ p + s₂ g) at proposal draws, f₂ = g/(s₁ p + s₂ g) at posterior
   samples, p = q/Z, and τ_f₂ the integrated autocorrelation time of f₂ in the
   samples' order (1 for independent draws).  ``ln_z_err`` = √RE² (the
   relative error of Z is the absolute error of ln Z).

:func:`nested_sampling_evidence` runs dynesty (optional dependency) on the
same prior and likelihood for an independent estimate.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence

import numpy as np
from scipy import linalg, special

from ..errors import ModelEvaluationError, UserError
from ..inference.pilot import PriorTransform

PROPOSALS = ("normal", "t", "mixture")
_LOG_FLOOR = -1e300


@dataclasses.dataclass
class EvidenceResult:
    """An evidence estimate.

    Attributes
    ----------
    ln_z : float
        Natural log of the evidence (same normalisation as the target: a
        normalised prior times a normalised likelihood gives the true ln Z).
    ln_z_err : float
        Estimated standard error of ``ln_z``.
    method : str
    n_posterior, n_proposal : int
        Posterior samples used in the iteration and proposal draws (bridge sampling),
        or live points and iterations (nested sampling).
    n_iterations : int
    converged : bool
    info : dict
        Method-specific diagnostics (autocorrelation of f₂, proposal kind, ...).
    """

    ln_z: float
    ln_z_err: float
    method: str
    n_posterior: int = 0
    n_proposal: int = 0
    n_iterations: int = 0
    converged: bool = True
    info: dict = dataclasses.field(default_factory=dict)


# --------------------------------------------------------------------------- transformations
class _Unbounded:
    """Maps a box (bounds per parameter, ±inf allowed) to ℝᵈ and back, with log |dx/dy|."""

    def __init__(self, bounds, ndim: int):
        if bounds is None:
            bounds = [(-np.inf, np.inf)] * ndim
        b = np.asarray(bounds, dtype=float).reshape(ndim, 2)
        self.lo, self.hi = b[:, 0], b[:, 1]
        if np.any(self.hi <= self.lo):
            raise ValueError("every bound needs lo < hi")
        self.both = np.isfinite(self.lo) & np.isfinite(self.hi)
        self.lower = np.isfinite(self.lo) & ~np.isfinite(self.hi)
        self.upper = ~np.isfinite(self.lo) & np.isfinite(self.hi)
        self.width = np.where(self.both, self.hi - self.lo, 1.0)

    def nudge_inside(self, x: np.ndarray, eps: float = 1e-9) -> np.ndarray:
        """Samples exactly on a finite bound moved inwards by ``eps`` of the range (or of 1 for one bound)."""
        step = eps * np.where(self.both, self.width, 1.0)
        x = np.where(np.isfinite(self.lo) & (x <= self.lo), self.lo + step, x)
        return np.where(np.isfinite(self.hi) & (x >= self.hi), self.hi - step, x)

    def to_unbounded(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        y = x.copy()
        with np.errstate(divide="ignore", invalid="ignore"):
            u = (x - self.lo) / self.width
            y = np.where(self.both, np.log(u) - np.log1p(-u), y)
            y = np.where(self.lower, np.log(x - self.lo), y)
            y = np.where(self.upper, np.log(self.hi - x), y)
        return y

    def from_unbounded(self, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """x(y) and log |dx/dy| summed over parameters."""
        y = np.asarray(y, dtype=float)
        x = y.copy()
        log_jac = np.zeros_like(y)
        x = np.where(self.both, self.lo + self.width * special.expit(y), x)
        # log(w σ(y)(1-σ(y))) = log w - softplus(-y) - softplus(y)
        log_jac = np.where(self.both, np.log(self.width) - np.logaddexp(0, -y) - np.logaddexp(0, y), log_jac)
        x = np.where(self.lower, self.lo + np.exp(y), x)
        log_jac = np.where(self.lower, y, log_jac)
        x = np.where(self.upper, self.hi - np.exp(y), x)
        log_jac = np.where(self.upper, y, log_jac)
        return x, log_jac.sum(axis=-1)


# --------------------------------------------------------------------------- proposals
class _Proposal:
    """Multivariate normal or Student-t proposal with given mean and covariance."""

    def __init__(self, mean, cov, kind: str = "normal", df: float = 5.0):
        if kind not in ("normal", "t"):
            raise ValueError(f"proposal must be 'normal' or 't', got {kind!r}")
        self.kind, self.df = kind, float(df)
        self.mean = np.asarray(mean, dtype=float)
        self.ndim = self.mean.size
        cov = np.atleast_2d(np.asarray(cov, dtype=float))
        # a t with ν dof and scale S has covariance S ν/(ν-2): match the sample covariance
        scale = cov * ((self.df - 2.0) / self.df) if kind == "t" else cov
        jitter = 1e-12 * np.trace(scale) / self.ndim
        self.chol = linalg.cholesky(scale + jitter * np.eye(self.ndim), lower=True)
        self.log_det = 2.0 * np.sum(np.log(np.diag(self.chol)))

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        z = rng.standard_normal((n, self.ndim))
        if self.kind == "t":
            z = z / np.sqrt(rng.chisquare(self.df, size=n) / self.df)[:, None]
        return self.mean + z @ self.chol.T

    def log_pdf(self, y: np.ndarray) -> np.ndarray:
        z = linalg.solve_triangular(self.chol, (np.atleast_2d(y) - self.mean).T, lower=True)
        m = np.sum(z * z, axis=0)
        d = self.ndim
        if self.kind == "normal":
            return -0.5 * (m + self.log_det + d * math.log(2 * math.pi))
        nu = self.df
        return (special.gammaln(0.5 * (nu + d)) - special.gammaln(0.5 * nu)
                - 0.5 * d * math.log(nu * math.pi) - 0.5 * self.log_det
                - 0.5 * (nu + d) * np.log1p(m / nu))


class _Mixture:
    """Gaussian-mixture proposal fitted by expectation-maximisation (Bishop 2006, PRML, Sect. 9.2.2).

    Initialised by k-means++ seeding (Arthur & Vassilvitskii 2007) with the given generator; every
    component covariance gets a small ridge so that it stays positive definite.
    """

    def __init__(self, y: np.ndarray, n_components: int, rng: np.random.Generator, n_iter: int = 200,
                 tol: float = 1e-8):
        n, d = y.shape
        k = max(1, min(int(n_components), n // (5 * (d + 1))))
        ridge = 1e-6 * np.diag(np.atleast_2d(np.cov(y.T))).mean() * np.eye(d)
        centres = [y[rng.integers(n)]]
        for _ in range(1, k):
            d2 = np.min([np.sum((y - c) ** 2, axis=1) for c in centres], axis=0)
            centres.append(y[rng.choice(n, p=d2 / d2.sum())] if d2.sum() > 0 else y[rng.integers(n)])
        resp = np.eye(k)[np.argmin([np.sum((y - c) ** 2, axis=1) for c in centres], axis=0)]
        prev = -np.inf
        for _ in range(n_iter):
            self._m_step(y, resp, ridge)
            log_p = self._component_log_pdf(y)
            total = special.logsumexp(log_p, axis=1)
            resp = np.exp(log_p - total[:, None])
            ll = float(total.mean())
            if ll - prev < tol:
                break
            prev = ll
        self._m_step(y, resp, ridge)
        self.ndim = d

    def _m_step(self, y, resp, ridge):
        nk = resp.sum(axis=0) + 1e-12
        keep = nk > 1e-6 * y.shape[0]
        resp, nk = resp[:, keep], nk[keep]
        self.weights = nk / nk.sum()
        self.means = (resp.T @ y) / nk[:, None]
        self.parts = []
        for j in range(nk.size):
            z = y - self.means[j]
            cov = (resp[:, j, None] * z).T @ z / nk[j] + ridge
            self.parts.append(_Proposal(self.means[j], cov, "normal"))

    def _component_log_pdf(self, y):
        return np.column_stack([np.log(w) + g.log_pdf(y) for w, g in zip(self.weights, self.parts)])

    def log_pdf(self, y: np.ndarray) -> np.ndarray:
        return special.logsumexp(self._component_log_pdf(np.atleast_2d(y)), axis=1)

    def sample(self, rng: np.random.Generator, n: int) -> np.ndarray:
        counts = rng.multinomial(n, self.weights)
        out = np.concatenate([g.sample(rng, c) for g, c in zip(self.parts, counts) if c])
        return out[rng.permutation(n)]


# --------------------------------------------------------------------------- helpers
def _log_mean_exp(a: np.ndarray) -> float:
    return float(special.logsumexp(a) - math.log(a.size))


def _autocorr_time(f: np.ndarray) -> float:
    """Integrated autocorrelation time of chains ``f`` (n_steps, n_chains) or one sequence, at least 1.

    The normalised autocorrelation is averaged over chains and summed up to
    Sokal's automatic window (c = 5), as in emcee (Foreman-Mackey et al. 2013).
    """
    f = np.asarray(f, dtype=float)
    f = f[:, None] if f.ndim == 1 else f
    n = f.shape[0]
    if n < 16 or np.var(f) == 0:
        return 1.0
    x = f - f.mean(axis=0)
    m = 1 << (2 * n - 1).bit_length()
    acf = np.fft.irfft(np.abs(np.fft.rfft(x, n=m, axis=0)) ** 2, axis=0)[:n]
    good = acf[0] > 0
    if not np.any(good):
        return 1.0
    acf = np.mean(acf[:, good] / acf[0, good], axis=1)
    taus = 2.0 * np.cumsum(acf) - 1.0
    window = np.arange(n) >= 5.0 * taus          # Sokal (1997): first M with M >= c τ(M), c = 5
    m_win = int(np.argmax(window)) if window.any() else n - 1
    return max(1.0, float(taus[m_win]))


def _evaluate(log_target: Callable, points: np.ndarray, map_fn=map) -> np.ndarray:
    out = np.empty(points.shape[0])
    for i, v in enumerate(map_fn(_SafeTarget(log_target), list(points))):
        out[i] = v
    return out


class _SafeTarget:
    """log_target that returns -inf for model failures and NaN (picklable for process pools)."""

    def __init__(self, fn):
        self.fn = fn

    def __call__(self, theta):
        try:
            with np.errstate(all="ignore"):
                v = float(self.fn(np.asarray(theta, dtype=float)))
        except ModelEvaluationError:
            return -math.inf
        return v if math.isfinite(v) or v == -math.inf else -math.inf


# --------------------------------------------------------------------------- bridge sampling
def bridge_sampling(log_target: Callable, samples, log_target_values=None, bounds=None,
                    proposal: str = "normal", df: float = 5.0, n_components: int = 3,
                    n_proposal: int | None = None,
                    rng: np.random.Generator | None = None, seed: int | None = None,
                    tol: float = 1e-10, max_iter: int = 1000, map_fn=map, n_chains: int = 1) -> EvidenceResult:
    """ln Z from posterior samples by bridge sampling (module docstring has the method).

    Parameters
    ----------
    log_target : callable
        ``log_target(theta) -> float``: ln[π(θ) L(θ)] with a normalised prior
        and likelihood; ``-inf`` outside the support.  May raise
        :class:`~retrieve.errors.ModelEvaluationError` (taken as ``-inf``).
    samples : array_like (n, d)
        Posterior samples (e.g. a thinned MCMC chain), in their chain order.
    log_target_values : array_like (n,), optional
        ``log_target`` at ``samples`` if already known (saves n evaluations).
    bounds : sequence of (lo, hi), optional
        Support of each parameter (±inf for an open side); default unbounded.
    proposal : {"normal", "t", "mixture"}
        Multivariate normal, Student t, or a Gaussian mixture fitted by EM
        (for multimodal or curved posteriors).
    df : float
        Degrees of freedom of the t proposal (> 2).
    n_components : int
        Components of the mixture proposal (fewer if the fitting half is small).
    n_proposal : int, optional
        Draws from the proposal (default: as many as posterior samples in the second half).
    rng, seed
        Random generator (or a seed for one); default seed 0 (deterministic).
    tol, max_iter
        Stop when |Δ ln r| < tol, or after max_iter iterations.
    map_fn : callable
        ``map``-like function used to evaluate ``log_target`` on the proposal
        draws (e.g. ``pool.map`` for a process pool).
    n_chains : int
        The samples are ``n_chains`` interleaved chains in step-major order (an
        emcee chain flattened as ``chain[steps, walkers].reshape(-1, d)``).  The
        halves are then made of whole chains (walkers picked at random), and the
        autocorrelation time of f₂ is measured along the steps; with 1 the rows
        are split at random and taken as one sequence.

    Returns
    -------
    EvidenceResult
    """
    if proposal not in PROPOSALS:
        raise ValueError(f"proposal must be one of {PROPOSALS}, got {proposal!r}")
    x = np.atleast_2d(np.asarray(samples, dtype=float))
    if x.ndim != 2 or x.shape[0] < 8:
        raise UserError(f"bridge sampling needs at least 8 posterior samples, got {x.shape[0]}")
    n, d = x.shape
    rng = rng if rng is not None else np.random.default_rng(0 if seed is None else seed)
    tr = _Unbounded(bounds, d)
    outside = ((x < tr.lo) | (x > tr.hi)).any(axis=1)
    if np.any(outside):
        raise UserError(f"bridge sampling: {int(outside.sum())} posterior samples lie outside the prior bounds")
    # a walker that never left its (clipped) starting point can sit exactly on a bound, where the
    # logit is infinite: move such samples inside by 1e-9 of the range (the density is unchanged)
    x = tr.nudge_inside(x)
    y = tr.to_unbounded(x)
    if log_target_values is None:
        q = _evaluate(log_target, x, map_fn)
    else:
        q = np.asarray(log_target_values, dtype=float).copy()
    _, log_jac = tr.from_unbounded(y)
    q_y = q + log_jac                                   # target density in the unbounded space

    fit_idx, iter_idx, shape = _split(n, int(n_chains), rng)
    if np.linalg.matrix_rank(np.cov(y[fit_idx].T).reshape(d, d)) < d:
        raise UserError("bridge sampling: the posterior samples are degenerate (a parameter does not vary)")
    if proposal == "mixture":
        g = _Mixture(y[fit_idx], n_components, rng)
    else:
        g = _Proposal(y[fit_idx].mean(axis=0), np.cov(y[fit_idx].T).reshape(d, d), proposal, df)
    n1 = iter_idx.size
    n2 = int(n_proposal) if n_proposal else n1
    y_prop = g.sample(rng, n2)
    x_prop, log_jac_prop = tr.from_unbounded(y_prop)
    q_prop = _evaluate(log_target, x_prop, map_fn) + log_jac_prop

    l1 = q_y[iter_idx] - g.log_pdf(y[iter_idx])        # ln(q/g) at posterior samples
    l2 = q_prop - g.log_pdf(y_prop)                     # ln(q/g) at proposal draws
    if not np.all(np.isfinite(l1)):
        raise UserError("bridge sampling: the target is not finite at some posterior samples")
    ln_z, n_iter, converged = _iterate(l1, l2, tol, max_iter)
    re2, tau = _relative_mse(l1, l2, ln_z, shape)
    info = {"proposal": proposal, "autocorr_time_f2": tau,
            "proposal_outside_support": int(np.sum(~np.isfinite(l2)))}
    if proposal == "t":
        info["df"] = df
    if proposal == "mixture":
        info["n_components"] = len(g.parts)
    return EvidenceResult(ln_z=ln_z, ln_z_err=math.sqrt(re2), method="bridge sampling", n_posterior=n1,
                          n_proposal=n2, n_iterations=n_iter, converged=converged, info=info)


def _split(n: int, n_chains: int, rng) -> tuple[np.ndarray, np.ndarray, tuple]:
    """Row indices of the proposal-fitting and iteration halves, and the (steps, chains) shape of the latter."""
    if n_chains > 3 and n % n_chains == 0 and n // n_chains >= 4:
        walkers = rng.permutation(n_chains)
        rows = np.arange(n).reshape(n // n_chains, n_chains)
        fit_w, iter_w = np.sort(walkers[: n_chains // 2]), np.sort(walkers[n_chains // 2:])
        return rows[:, fit_w].ravel(), rows[:, iter_w].ravel(), (n // n_chains, iter_w.size)
    # random halves; the second half keeps the sample order (for its autocorrelation time)
    perm = rng.permutation(n)
    iter_idx = np.sort(perm[n // 2:])
    return np.sort(perm[: n // 2]), iter_idx, (iter_idx.size, 1)


def _iterate(l1: np.ndarray, l2: np.ndarray, tol: float, max_iter: int) -> tuple[float, int, bool]:
    """Meng & Wong (1996) iteration in log space; returns (ln Z, iterations, converged)."""
    n1, n2 = l1.size, l2.size
    log_s1, log_s2 = math.log(n1 / (n1 + n2)), math.log(n2 / (n1 + n2))
    shift = float(np.median(l1))                        # keeps exponents near 0
    a1, a2 = l1 - shift, l2 - shift
    log_r = 0.0
    for it in range(1, max_iter + 1):
        # numerator terms l2/(s1 l2 + s2 r) = 1/(s1 + s2 r/l2); denominator 1/(s1 l1 + s2 r)
        log_num = -np.logaddexp(log_s1, log_s2 + log_r - a2)
        log_den = -np.logaddexp(log_s1 + a1, log_s2 + log_r)
        new = _log_mean_exp(log_num) - _log_mean_exp(log_den)
        if abs(new - log_r) < tol:
            return new + shift, it, True
        log_r = new
    return log_r + shift, max_iter, False


def _relative_mse(l1: np.ndarray, l2: np.ndarray, ln_z: float, shape: tuple) -> tuple[float, float]:
    """Frühwirth-Schnatter (2004) relative MSE of Ẑ and the autocorrelation time used."""
    n1, n2 = l1.size, l2.size
    s1, s2 = n1 / (n1 + n2), n2 / (n1 + n2)
    with np.errstate(over="ignore", invalid="ignore"):
        a = np.exp(np.clip(l2 - ln_z, -700, 700))       # p/g at proposal draws
        b = np.exp(np.clip(l1 - ln_z, -700, 700))       # p/g at posterior samples
        f1 = a / (s1 * a + s2)
        f2 = 1.0 / (s1 * b + s2)
    tau = _autocorr_time(f2.reshape(shape))
    term1 = np.var(f1, ddof=1) / (n2 * np.mean(f1) ** 2) if np.mean(f1) > 0 else math.inf
    term2 = tau * np.var(f2, ddof=1) / (n1 * np.mean(f2) ** 2)
    return float(term1 + term2), tau


# --------------------------------------------------------------------------- posterior objects
def support_bounds(priors: Sequence) -> list[tuple[float, float]]:
    """(lo, hi) of each prior's support, ±inf where the prior density is non-zero beyond ``bounds``."""
    out = []
    for p in priors:
        lo, hi = p.bounds
        span = hi - lo
        open_lo = bool(np.isfinite(p.log_pdf(lo - 1e-3 * span)))
        open_hi = bool(np.isfinite(p.log_pdf(hi + 1e-3 * span)))
        out.append((-np.inf if open_lo else lo, np.inf if open_hi else hi))
    return out


def evidence_of_run(log_posterior, samples, log_prob=None, n_proposal: int | None = None,
                    proposal: str = "normal", seed: int = 0, map_fn=map, check: int = 3,
                    n_chains: int = 1) -> EvidenceResult:
    """Bridge-sampling evidence of a retrieval from its posterior samples.

    Parameters
    ----------
    log_posterior : retrieve.inference.likelihood.LogPosterior
        ln π + ln L with normalised priors and Gaussian likelihood (callable on θ).
    samples : astropy.table.Table or mapping
        Columns named after ``log_posterior.param_names``.
    log_prob : array_like, optional
        ln posterior at the samples (e.g. the ``log_prob`` column); checked on
        ``check`` samples against ``log_posterior`` and recomputed if it disagrees.
    n_proposal, proposal, seed, map_fn, n_chains
        As in :func:`bridge_sampling` (``n_chains``: the run's walkers, whose
        thinned chain the samples are in step-major order).

    Returns
    -------
    EvidenceResult
    """
    x = np.column_stack([np.asarray(samples[name], dtype=float) for name in log_posterior.param_names])
    if log_prob is not None:
        log_prob = np.asarray(log_prob, dtype=float)
        idx = np.linspace(0, x.shape[0] - 1, min(check, x.shape[0])).astype(int)
        fresh = np.array([log_posterior(x[i]) for i in idx])
        if not np.allclose(fresh, log_prob[idx], rtol=0, atol=1e-6 * max(1.0, np.abs(fresh).max())):
            log_prob = None
    return bridge_sampling(log_posterior, x, log_target_values=log_prob,
                           bounds=support_bounds(log_posterior.priors), proposal=proposal,
                           n_proposal=n_proposal, seed=seed, map_fn=map_fn, n_chains=n_chains)


# --------------------------------------------------------------------------- nested sampling
class _NestedLikelihood:
    """ln L of a LogPosterior for dynesty (model failures → a very low value)."""

    def __init__(self, post):
        self.post = post

    def __call__(self, theta):
        try:
            with np.errstate(all="ignore"):
                v = self.post.log_likelihood(self.post.params(theta))
        except (ModelEvaluationError, FloatingPointError):
            return _LOG_FLOOR
        return v if math.isfinite(v) else _LOG_FLOOR


def nested_sampling_evidence(log_likelihood: Callable, prior_transform: Callable, ndim: int,
                             nlive: int = 250, dlogz: float = 0.05, seed: int = 0,
                             sample: str = "auto") -> EvidenceResult:
    """ln Z by nested sampling with dynesty (Speagle 2020, MNRAS 493, 3132), if installed.

    Parameters
    ----------
    log_likelihood : callable
        ``ln L(θ)`` (normalised).
    prior_transform : callable
        Unit hypercube → parameters.
    ndim, nlive, dlogz, seed, sample
        Passed to :class:`dynesty.NestedSampler` / ``run_nested``.

    Raises
    ------
    UserError
        dynesty is not installed.
    """
    try:
        import dynesty
    except ImportError:
        raise UserError("nested sampling needs dynesty (a dependency of retrieve-atmo): pip install dynesty") from None
    sampler = dynesty.NestedSampler(log_likelihood, prior_transform, ndim, nlive=nlive, sample=sample,
                                    rstate=np.random.default_rng(seed))
    sampler.run_nested(dlogz=dlogz, print_progress=False)
    res = sampler.results
    return EvidenceResult(ln_z=float(res.logz[-1]), ln_z_err=float(res.logzerr[-1]), method="nested sampling",
                          n_posterior=nlive, n_proposal=int(res.niter), n_iterations=int(res.niter),
                          info={"ncall": int(np.sum(res.ncall))})


def nested_evidence_of_run(log_posterior, nlive: int = 250, dlogz: float = 0.05, seed: int = 0) -> EvidenceResult:
    """dynesty evidence of a :class:`~retrieve.inference.likelihood.LogPosterior` (cross-check)."""
    return nested_sampling_evidence(_NestedLikelihood(log_posterior), PriorTransform(log_posterior.priors),
                                    log_posterior.ndim, nlive=nlive, dlogz=dlogz, seed=seed)
