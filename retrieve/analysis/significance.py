"""Bayes factor → equivalent "σ" significance (Benneke & Seager 2013, after Sellke et al. 2001).

Sellke, Bayarri & Berger (2001, Am. Stat. 55, 62) bound the Bayes factor in
favour of an alternative obtainable from a p-value p < 1/e:

    B ≤ −1 / (e p ln p).

Benneke & Seager (2013, ApJ 778, 153, Sect. 3.5 and Table 2) invert this
bound: given B, solve for p and quote the two-tailed normal deviate
σ = Φ⁻¹(1 − p/2).  With u = ln p the equation is u e^u = −1/(e B), so
p = exp(W₋₁(−1/(e B))) with the lower branch W₋₁ of the Lambert W function
(the root with p < 1/e).

The mapping is defined only for B > 1 (p < 1/e); for B ≤ 1 — no evidence for
the more complex model — we report 0σ.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import special

CAVEAT = ("significance_sigma converts the Bayes factor with the Sellke, Bayarri & Berger (2001) bound "
          "B <= -1/(e p ln p) as in Benneke & Seager (2013, ApJ 778, 153): it is a calibration convention, "
          "not a frequentist p-value; it holds only for B > 1 (ln B <= 0 is reported as 0 sigma); the Bayes "
          "factor is conditional on the two models compared and on their priors, and the evidence estimates "
          "carry the numerical errors in ln_bayes_factor_err")


def log_p_value_from_ln_bayes(ln_b):
    """Natural log of the p-value matching ln B under the Sellke et al. (2001) bound.

    Parameters
    ----------
    ln_b : float or array_like
        Natural log of the Bayes factor in favour of the more complex model.

    Returns
    -------
    float or ndarray
        ln p in (-inf, -1); -1 (p = 1/e) where ln B ≤ 0, where the bound carries no information.
    """
    ln_b = np.asarray(ln_b, dtype=float)
    lb = np.maximum(np.nan_to_num(ln_b, nan=0.0), 0.0)
    # argument -1/(e B) = -exp(-1 - ln B), in [-1/e, 0) for ln B >= 0
    with np.errstate(invalid="ignore", under="ignore"):
        u = np.real(special.lambertw(-np.exp(-1.0 - lb), k=-1))
    # where z underflows, the series W_-1(z) ≈ L1 - L2 + L2/L1 with L1 = ln(-z) = -1 - ln B and
    # L2 = ln(-L1) (Corless et al. 1996, Adv. Comput. Math. 5, 329, eq. 4.19)
    l1 = -1.0 - lb
    l2 = np.log(-l1)
    u = np.where(lb > 600.0, l1 - l2 + l2 / l1, u)
    u = np.where(lb <= 0.0, -1.0, u)
    u = np.where(np.isnan(ln_b), np.nan, u)
    return u[()] if u.ndim == 0 else u


def p_value_from_ln_bayes(ln_b):
    """Smallest p-value consistent with a Bayes factor under the Sellke et al. (2001) bound (1/e for ln B ≤ 0)."""
    return np.exp(log_p_value_from_ln_bayes(ln_b))


def sigma_from_log_p(log_p):
    """Two-tailed normal deviate Φ⁻¹(1 − p/2) from ln p (stable for tiny p)."""
    log_p = np.asarray(log_p, dtype=float)
    out = -special.ndtri_exp(log_p - math.log(2.0))
    return out[()] if out.ndim == 0 else out


def sigma_from_ln_bayes(ln_b):
    """Equivalent significance (σ) of ln B; 0 where ln B ≤ 0, NaN where ln B is NaN.

    Parameters
    ----------
    ln_b : float or array_like

    Returns
    -------
    float or ndarray
    """
    ln_b = np.asarray(ln_b, dtype=float)
    sig = sigma_from_log_p(log_p_value_from_ln_bayes(ln_b))
    sig = np.where(ln_b <= 0.0, 0.0, sig)
    return sig[()] if sig.ndim == 0 else sig


def ln_bayes_from_sigma(sigma):
    """Inverse mapping: the ln B matching an equivalent significance (NaN for σ ≤ 0.90, i.e. p ≥ 1/e)."""
    sigma = np.asarray(sigma, dtype=float)
    log_p = math.log(2.0) + special.log_ndtr(-sigma)
    with np.errstate(invalid="ignore", divide="ignore"):
        ln_b = np.where(log_p < -1.0, -1.0 - log_p - np.log(-log_p), np.nan)
    return ln_b[()] if ln_b.ndim == 0 else ln_b
