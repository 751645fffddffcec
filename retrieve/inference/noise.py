"""Noise models of one dataset: covariance, error inflation and a correlated-noise kernel.

The Gaussian log-likelihood of residuals ``r = d - s·m`` is

    ln L = -½ [ rᵀ C⁻¹ r + ln det C + n ln 2π ].

The covariance ``C`` is built from the dataset and up to three hyperparameters
(per dataset ``<name>``):

* **error inflation** ``log_inflate_<name> = b``: every variance gains a
  constant term, ``σ_i² → σ_i² + 10^b`` (``b`` is log10 of a variance in
  (W m⁻² µm⁻¹)²); with a full covariance, ``C → C + 10^b I``.  The additive
  form follows published brown-dwarf retrievals (Line et al. 2015, ApJ 807, 183).
* **correlated noise** ``gp_amp_<name> = A`` (0 ≤ A ≤ 1) and
  ``gp_length_um_<name> = ℓ`` (µm): a squared-exponential kernel in wavelength
  (Greco & Brandt 2016, ApJ 833, 134, eq. 2 with the photon-noise term folded in)

      C_ij = σ_i σ_j [ A exp(-½ (Δλ_ij/ℓ)²) + (1 − A) δ_ij ],

  where σ_i are the (inflated) per-channel uncertainties.

Factorisations are cached: a fixed covariance is factorised once at set-up, a
hyperparameter-dependent one is re-factorised only when the hyperparameter
values change (small LRU cache keyed on the exact values).
"""
from __future__ import annotations

import math
from collections import OrderedDict

import numpy as np
from scipy import linalg

from ..errors import ModelEvaluationError

LOG_2PI = math.log(2.0 * math.pi)


class _Factor:
    """Cholesky factor of a covariance with its log-determinant."""

    __slots__ = ("lower", "logdet", "diag")

    def __init__(self, cov: np.ndarray | None = None, variance: np.ndarray | None = None):
        if variance is not None:
            if np.any(~(variance > 0)):
                raise ModelEvaluationError("covariance not positive definite")
            self.diag = np.asarray(variance, dtype=float)
            self.lower = None
            self.logdet = float(np.sum(np.log(self.diag)))
        else:
            try:
                self.lower = linalg.cholesky(cov, lower=True, check_finite=False)
            except linalg.LinAlgError:
                raise ModelEvaluationError("covariance not positive definite") from None
            self.diag = None
            self.logdet = float(2.0 * np.sum(np.log(np.diag(self.lower))))

    def chi2(self, r: np.ndarray) -> float:
        """rᵀ C⁻¹ r."""
        if self.diag is not None:
            return float(np.sum(r * r / self.diag))
        z = linalg.solve_triangular(self.lower, r, lower=True, check_finite=False)
        return float(z @ z)


class NoiseModel:
    """Covariance of one dataset as a function of its noise hyperparameters.

    Parameters
    ----------
    wavelength_um : ndarray (n,)
    variance : ndarray (n,)
        Per-point variances (the diagonal of ``covariance`` if that is given).
    covariance : ndarray (n, n) or None
        Full covariance from the data; ``None`` for independent errors.
    inflate : bool
        Whether ``log_inflate`` is a hyperparameter.
    correlated : bool
        Whether ``gp_amp`` and ``gp_length_um`` are hyperparameters
        (not allowed together with a full ``covariance``).
    cache_size : int
        Number of hyperparameter settings whose factorisation is kept.
    """

    def __init__(self, wavelength_um, variance, covariance=None, inflate=False, correlated=False,
                 cache_size: int = 8):
        self.wavelength_um = np.asarray(wavelength_um, dtype=float)
        self.variance = np.asarray(variance, dtype=float)
        self.covariance = None if covariance is None else np.asarray(covariance, dtype=float)
        if correlated and self.covariance is not None:
            raise ValueError("a correlated-noise kernel cannot be combined with a full covariance")
        self.inflate = bool(inflate)
        self.correlated = bool(correlated)
        self.n = self.variance.size
        self._dlam2 = (self.wavelength_um[:, None] - self.wavelength_um[None, :]) ** 2 if correlated else None
        self._cache: OrderedDict = OrderedDict()
        self._cache_size = int(cache_size)
        self.n_factorisations = 0
        self._static = None
        if not (self.inflate or self.correlated):
            self._static = self._factorise(())

    def covariance_matrix(self, log_inflate: float | None = None, gp_amp: float | None = None,
                          gp_length_um: float | None = None) -> np.ndarray:
        """The full covariance for these hyperparameters (dense, for checks and plots)."""
        var = self.variance + (10.0 ** log_inflate if self.inflate else 0.0)
        if self.correlated:
            sig = np.sqrt(var)
            kern = gp_amp * np.exp(-0.5 * self._dlam2 / gp_length_um ** 2)
            kern[np.diag_indices(self.n)] += 1.0 - gp_amp
            return sig[:, None] * sig[None, :] * kern
        if self.covariance is not None:
            cov = self.covariance.copy()
            if self.inflate:
                cov[np.diag_indices(self.n)] += 10.0 ** log_inflate
            return cov
        return np.diag(var)

    def _factorise(self, key: tuple) -> _Factor:
        self.n_factorisations += 1
        hyper = dict(key)
        if self.correlated:
            return _Factor(cov=self.covariance_matrix(**hyper))
        if self.covariance is not None:
            return _Factor(cov=self.covariance_matrix(**hyper))
        var = self.variance + (10.0 ** hyper["log_inflate"] if self.inflate else 0.0)
        return _Factor(variance=var)

    def factor(self, log_inflate=None, gp_amp=None, gp_length_um=None) -> _Factor:
        """Cholesky factor for these hyperparameters, from the cache when possible."""
        if self._static is not None:
            return self._static
        key = []
        if self.inflate:
            key.append(("log_inflate", float(log_inflate)))
        if self.correlated:
            key += [("gp_amp", float(gp_amp)), ("gp_length_um", float(gp_length_um))]
        key = tuple(key)
        hit = self._cache.get(key)
        if hit is not None:
            self._cache.move_to_end(key)
            return hit
        fac = self._factorise(key)
        self._cache[key] = fac
        if len(self._cache) > self._cache_size:
            self._cache.popitem(last=False)
        return fac

    def log_likelihood(self, residual: np.ndarray, **hyper) -> float:
        """Gaussian log-likelihood of ``residual`` for these hyperparameters."""
        fac = self.factor(**hyper)
        return -0.5 * (fac.chi2(residual) + fac.logdet + self.n * LOG_2PI)
