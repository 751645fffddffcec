"""Gaussian mixtures fitted to posterior samples: the proposal density of the pilot-mixture move.

A :class:`GaussianMixture` is fitted by expectation–maximisation (Dempster,
Laird & Rubin 1977; the update equations of Bishop 2006, *Pattern
Recognition and Machine Learning*, §9.2.2) to a set of equal-weight points,
after standardising each coordinate by its sample mean and standard
deviation so that parameters of very different scale (log g and K, say)
are treated alike.  Starting centres are chosen by the k-means++ rule
(Arthur & Vassilvitskii 2007); the number of components by the Bayesian
information criterion (Schwarz 1978) over a few candidate counts.

:func:`defensive` widens a fitted mixture for use as an independence
proposal: every covariance is inflated, and a broad component (the sample
covariance × ``broad_scale``²) is added with a small weight — a *defensive
mixture* (Hesterberg 1995, Technometrics 37, 185) — so that the proposal's
tails are heavier than the target's wherever the fit was poor.
"""
from __future__ import annotations

import dataclasses

import numpy as np
from scipy.special import logsumexp

_LOG_2PI = np.log(2.0 * np.pi)


@dataclasses.dataclass(frozen=True)
class GaussianMixture:
    """Weights (k,), means (k, d) and covariances (k, d, d) of a Gaussian mixture."""

    weights: np.ndarray
    means: np.ndarray
    covariances: np.ndarray

    def __post_init__(self):
        w = np.asarray(self.weights, float)
        if w.ndim != 1 or np.any(w < 0) or not np.isclose(w.sum(), 1.0, rtol=0, atol=1e-9):
            raise ValueError("mixture weights must be non-negative and sum to 1")
        object.__setattr__(self, "weights", w)
        object.__setattr__(self, "means", np.atleast_2d(np.asarray(self.means, float)))
        object.__setattr__(self, "covariances", np.asarray(self.covariances, float).reshape(
            len(w), self.means.shape[1], self.means.shape[1]))
        # Cholesky factors once; log_pdf and sample reuse them
        object.__setattr__(self, "_chol", np.linalg.cholesky(self.covariances))

    @property
    def n_components(self) -> int:
        return len(self.weights)

    @property
    def ndim(self) -> int:
        return self.means.shape[1]

    def component_log_pdf(self, x: np.ndarray) -> np.ndarray:
        """ln N(x | μ_j, Σ_j) for every point and component: (n, k)."""
        x = np.atleast_2d(np.asarray(x, float))
        out = np.empty((len(x), self.n_components))
        for j, (mu, chol) in enumerate(zip(self.means, self._chol)):
            z = np.linalg.solve(chol, (x - mu).T)            # L⁻¹(x − μ)
            log_det = 2.0 * np.sum(np.log(np.diag(chol)))
            out[:, j] = -0.5 * (np.sum(z * z, axis=0) + log_det + self.ndim * _LOG_2PI)
        return out

    def log_pdf(self, x: np.ndarray) -> np.ndarray:
        """Mixture log density at each row of ``x``: (n,)."""
        with np.errstate(divide="ignore"):
            log_w = np.log(self.weights)
        return logsumexp(self.component_log_pdf(x) + log_w, axis=1)

    def sample(self, n: int, random) -> np.ndarray:
        """``n`` draws; ``random`` is a :class:`numpy.random.RandomState` or ``Generator``."""
        comp = random.choice(self.n_components, size=int(n), p=self.weights)
        z = random.standard_normal((int(n), self.ndim))
        return self.means[comp] + np.einsum("nij,nj->ni", self._chol[comp], z)


def _kmeanspp(x: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    """k starting centres by the k-means++ rule (Arthur & Vassilvitskii 2007)."""
    centres = [x[rng.integers(len(x))]]
    d2 = np.sum((x - centres[0]) ** 2, axis=1)
    for _ in range(1, k):
        p = d2 / d2.sum() if d2.sum() > 0 else np.full(len(x), 1.0 / len(x))
        centres.append(x[rng.choice(len(x), p=p)])
        d2 = np.minimum(d2, np.sum((x - centres[-1]) ** 2, axis=1))
    return np.array(centres)


def _em(x: np.ndarray, w: np.ndarray, k: int, rng: np.random.Generator, max_iter: int, tol: float,
        reg: float) -> tuple[GaussianMixture, float]:
    """Weighted EM (point weights ``w``, summing to 1) on standardised points: (mixture, mean log-likelihood)."""
    d = x.shape[1]
    means = _kmeanspp(x, k, rng)
    labels = np.argmin(((x[:, None, :] - means[None]) ** 2).sum(-1), axis=1)
    resp = np.eye(k)[labels]
    previous = -np.inf
    mix = None
    for _ in range(max_iter):
        rw = resp * w[:, None]
        nk = rw.sum(0) + 1e-300
        means = rw.T @ x / nk[:, None]
        covs = np.empty((k, d, d))
        for j in range(k):
            diff = x - means[j]
            covs[j] = (rw[:, j, None] * diff).T @ diff / nk[j] + reg * np.eye(d)
        mix = GaussianMixture(nk / nk.sum(), means, covs)
        with np.errstate(divide="ignore"):
            log_joint = mix.component_log_pdf(x) + np.log(mix.weights)
        total = logsumexp(log_joint, axis=1)
        resp = np.exp(log_joint - total[:, None])
        current = float(w @ total)      # mean log-likelihood of ``mix``
        if current - previous < tol:
            break
        previous = current
    return mix, current


def fit_mixture(samples: np.ndarray, rng: np.random.Generator, components=(1, 2, 3, 4, 6, 8),
                max_iter: int = 300, tol: float = 1e-8, reg: float = 1e-4,
                points_per_parameter: float = 1.0) -> GaussianMixture:
    """Mixture fitted to equal-weight ``samples`` (n, d), the component count chosen by BIC.

    Repeated rows (an equal-weight resample repeats points) are merged into
    distinct points weighted by their multiplicity, and the BIC uses the
    effective sample size (Σw)²/Σw² of those weights (Kish 1965), so that
    repeats do not pass for information.  ``reg`` is added to every
    covariance diagonal in standardised units (a floor on the width of each
    component, in units of the sample variance).  Counts with fewer than
    ``points_per_parameter`` effective points per free mixture parameter are
    skipped.
    """
    x_all = np.asarray(samples, float)
    x, counts = np.unique(x_all, axis=0, return_counts=True)
    w = counts / counts.sum()
    n_eff = 1.0 / np.sum(w ** 2)
    d = x.shape[1]
    centre = w @ x
    scale = np.sqrt(w @ (x - centre) ** 2)
    scale = np.where(scale > 0, scale, 1.0)
    z = (x - centre) / scale
    per_component = d + d * (d + 1) / 2 + 1
    best, best_bic = None, np.inf
    for k in components:
        if k > 1 and n_eff < points_per_parameter * k * per_component:
            continue
        mix, mean_loglike = _em(z, w, k, rng, max_iter, tol, reg)
        bic = -2.0 * n_eff * mean_loglike + (k * per_component - 1) * np.log(n_eff)
        if bic < best_bic:
            best, best_bic = mix, bic
    return GaussianMixture(best.weights, centre + best.means * scale,
                           best.covariances * np.outer(scale, scale))


def defensive(mix: GaussianMixture, samples: np.ndarray, inflate: float = 1.2, broad_weight: float = 0.05,
              broad_scale: float = 2.0) -> GaussianMixture:
    """``mix`` with covariances × ``inflate``² plus a broad component of weight ``broad_weight``.

    The broad component is centred on the sample mean with the sample
    covariance × ``broad_scale``² (defensive mixture, Hesterberg 1995).
    """
    x = np.asarray(samples, float)
    broad_cov = np.cov(x, rowvar=False).reshape(mix.ndim, mix.ndim) * broad_scale ** 2
    broad_cov += 1e-12 * np.diag(np.diag(broad_cov) + 1.0)
    weights = np.append((1.0 - broad_weight) * mix.weights, broad_weight)
    means = np.vstack([mix.means, x.mean(0)])
    covs = np.concatenate([mix.covariances * inflate ** 2, broad_cov[None]])
    return GaussianMixture(weights / weights.sum(), means, covs)
