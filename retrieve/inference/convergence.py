"""Convergence of an ensemble chain: integrated autocorrelation time, stopping rule, burn-in and thinning.

The integrated autocorrelation time τ of each parameter is estimated with
``emcee.autocorr.integrated_time`` (Goodman & Weare 2010; the windowed
estimator of Sokal 1997 with c = 5), ``tol=0`` so that it always returns an
estimate, on the chain after a start-up discard (:func:`tau_discard`):
``burn_in_tau`` × the previous check's max τ, at most half the chain (half
the chain at the first check) — estimating τ on the post-burn-in part is
common practice (no source).  The chain is declared converged when

* its length after the discard exceeds ``tau_factor`` × max τ (default 50), and
* every τ changed by less than ``tau_rtol`` (default 1 %) relative to the
  previous check,

which is the rule recommended in the emcee documentation ("Autocorrelation
analysis & convergence").  Burn-in is ``burn_in_tau`` × max τ steps and the
thinning interval ``thin_tau`` × min τ (at least 1).
"""
from __future__ import annotations

import dataclasses
import math

import emcee
import numpy as np


def autocorr_time(chain: np.ndarray) -> np.ndarray:
    """Integrated autocorrelation time per parameter, in steps.

    Parameters
    ----------
    chain : ndarray (n_steps, n_walkers, n_dim)

    Returns
    -------
    ndarray (n_dim,)
        ``nan`` where it cannot be estimated (e.g. a constant parameter).
    """
    if chain.shape[0] < 2:
        return np.full(chain.shape[-1], np.nan)
    with np.errstate(all="ignore"):
        tau = emcee.autocorr.integrated_time(chain, c=5, tol=0, quiet=True)
    return np.asarray(tau, dtype=float)


def tau_discard(n_steps: int, tau_prev: np.ndarray | None, burn_in_tau: float = 3.0) -> int:
    """Steps dropped from the start of the chain before τ is estimated.

    ``ceil(burn_in_tau × max τ_prev)`` capped at ``n_steps // 2``; half the
    chain when there is no finite previous τ.
    """
    half = int(n_steps) // 2
    if tau_prev is None:
        return half
    finite = np.asarray(tau_prev, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return half
    return min(int(math.ceil(burn_in_tau * float(finite.max()))), half)


@dataclasses.dataclass(frozen=True)
class ConvergenceRule:
    """Stopping rule parameters (see module docstring)."""

    tau_factor: float = 50.0
    tau_rtol: float = 0.01

    def converged(self, n_steps: int, tau: np.ndarray, tau_prev: np.ndarray | None) -> bool:
        """True when the chain is long and τ is stable (``n_steps``: length after the discard)."""
        if tau_prev is None or not np.all(np.isfinite(tau)) or not np.all(np.isfinite(tau_prev)):
            return False
        long_enough = n_steps > self.tau_factor * float(np.max(tau))
        stable = bool(np.all(np.abs(tau - tau_prev) < self.tau_rtol * tau))
        return bool(long_enough and stable)


def burn_in_and_thin(tau: np.ndarray, n_steps: int, burn_in_tau: float = 3.0, thin_tau: float = 0.5,
                     burn_in: int | None = None, thin: int | None = None) -> tuple[int, int]:
    """Burn-in length and thinning interval in steps.

    Explicit ``burn_in`` / ``thin`` win; otherwise they follow from τ.  Burn-in
    never exceeds half the chain so that a short (unconverged) chain still
    yields samples.
    """
    tau = np.asarray(tau, dtype=float)
    finite = tau[np.isfinite(tau)]
    tau_max = float(finite.max()) if finite.size else 1.0
    tau_min = float(finite.min()) if finite.size else 1.0
    if burn_in is None:
        burn_in = int(math.ceil(burn_in_tau * tau_max))
    burn_in = min(int(burn_in), n_steps // 2)
    if thin is None:
        thin = int(max(1, math.floor(thin_tau * tau_min)))
    return burn_in, max(1, int(thin))
