"""Line-profile physics: Doppler width and the Voigt profile.

Voigt profile V(x; σ, γ) = Re w(z) / (σ √(2π)), z = (x + iγ) / (σ √2), with
w the Faddeeva function (Armstrong 1967, JQSRT 7, 61; evaluated with
:func:`scipy.special.wofz`).  Widths here are half widths at half maximum
(HWHM): the Gaussian HWHM α_D = σ √(2 ln 2).
"""
from __future__ import annotations

import numpy as np
from scipy.special import wofz

from ..constants import AMU_CGS, C_CGS, K_B_CGS

SQRT_2LN2 = np.sqrt(2.0 * np.log(2.0))


def doppler_hwhm(wavenumber_cm, temperature_K: float, mass_amu: float):
    """Doppler HWHM α_D = ν/c √(2 ln2 k T / m), cm⁻¹ (e.g. Rothman et al. 1998, JQSRT 60, 665, eq. A5)."""
    return np.asarray(wavenumber_cm) / C_CGS * np.sqrt(2.0 * np.log(2.0) * K_B_CGS * temperature_K
                                                        / (mass_amu * AMU_CGS))


def voigt(x, doppler_hwhm_cm, lorentz_hwhm_cm):
    """Area-normalised Voigt profile at offsets ``x`` from line centre, cm (per cm⁻¹).

    Pure Gaussian / pure Lorentzian limits are handled when one width is zero.
    """
    x = np.asarray(x, dtype=np.float64)
    ad, gl = float(doppler_hwhm_cm), float(lorentz_hwhm_cm)
    if ad <= 0 and gl <= 0:
        raise ValueError("at least one of the Doppler and Lorentz widths must be positive")
    if ad <= 0:
        return gl / np.pi / (x * x + gl * gl)
    sigma = ad / SQRT_2LN2
    if gl <= 0:
        return np.exp(-0.5 * (x / sigma) ** 2) / (sigma * np.sqrt(2.0 * np.pi))
    z = (x + 1j * gl) / (sigma * np.sqrt(2.0))
    return wofz(z).real / (sigma * np.sqrt(2.0 * np.pi))


def truncated_fraction(lorentz_hwhm_cm, cutoff_cm: float):
    """Fraction of a Voigt profile's area within ±cutoff (Lorentzian wings; valid for cutoff ≫ α_D).

    ∫_{-c}^{c} γ/π/(x²+γ²) dx = (2/π) arctan(c/γ).
    """
    return (2.0 / np.pi) * np.arctan(cutoff_cm / np.maximum(lorentz_hwhm_cm, 1e-300))


def voigt_fast(x, doppler_hwhm_cm, lorentz_hwhm_cm, switch: float = 30.0):
    """Voigt profile, exact (Faddeeva) near the core and asymptotic in the wings.

    Where max(|x|, γ) > ``switch`` σ the profile is the Lorentzian plus its
    second-order Gaussian correction, V ≈ L + (σ²/2) L'' (the Gaussian
    convolution expanded in σ², e.g. Armstrong 1967, JQSRT 7, 61), with
    L'' = 2γ(3x² − γ²) / (π (x² + γ²)³); the neglected O(σ⁴/x⁴) terms stay below 3e-5
    relative there.  Much faster than :func:`voigt` on long kernels.
    """
    x = np.asarray(x, dtype=np.float64)
    ad, gl = float(doppler_hwhm_cm), float(lorentz_hwhm_cm)
    sigma = ad / SQRT_2LN2
    if gl <= 0 or ad <= 0:
        return voigt(x, ad, gl)
    r2 = x * x + gl * gl
    out = gl / np.pi / r2 + sigma * sigma * gl * (3 * x * x - gl * gl) / (np.pi * r2 ** 3)
    core = np.maximum(np.abs(x), gl) <= switch * sigma
    if np.any(core):
        out[core] = voigt(x[core], ad, gl)
    return out
