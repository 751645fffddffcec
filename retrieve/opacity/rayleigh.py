"""Rayleigh scattering by H₂ and He, treated as extinction (absorption-like opacity).

* H₂: the fit of Dalgarno & Williams (1962, ApJ 136, 690)::

      σ(λ) = 8.14e-13 λ⁻⁴ + 1.28e-6 λ⁻⁶ + 1.61 λ⁻⁸      [cm², λ in Å]

* He: the refractive-index form σ = 24π³/(N² λ⁴) ((n²−1)/(n²+2))² with the
  refractivity of Mansfield & Peck (1969, J. Opt. Soc. Am. 59, 199),
  n − 1 = 0.01470091 / (423.98 − λ⁻²) (λ in µm, 0 °C, 1 atm), N the
  Loschmidt number, and King factor 1 (an atom does not depolarise).

Treating scattering as extinction is the usual simplification for thermal
emission from self-luminous objects, where scattering is a minor term.
"""
from __future__ import annotations

import numpy as np

from ..constants import AMU_CGS, ATM_TO_BAR, BAR_TO_DYN_CM2, K_B_CGS

# number density of an ideal gas at 0 °C and 1 atm, cm⁻³
LOSCHMIDT_CM3 = ATM_TO_BAR * BAR_TO_DYN_CM2 / (K_B_CGS * 273.15)


def h2_rayleigh_cross_section(wavelength_um) -> np.ndarray:
    """H₂ Rayleigh cross section in cm² (Dalgarno & Williams 1962)."""
    inv2 = (1.0e4 * np.asarray(wavelength_um, dtype=np.float64)) ** -2   # Å⁻²
    return inv2 * inv2 * (8.14e-13 + inv2 * (1.28e-6 + inv2 * 1.61))


def he_refractivity(wavelength_um) -> np.ndarray:
    """n − 1 of He at 0 °C, 1 atm (Mansfield & Peck 1969)."""
    return 0.01470091 / (423.98 - np.asarray(wavelength_um, dtype=np.float64) ** -2)


def refractive_rayleigh_cross_section(wavelength_um, refractivity, king_factor=1.0) -> np.ndarray:
    """σ = 24π³/(N² λ⁴) ((n²−1)/(n²+2))² F_K, with N the Loschmidt number; cm².

    Parameters
    ----------
    wavelength_um : array_like
    refractivity : array_like
        n − 1 at 0 °C and 1 atm at those wavelengths.
    king_factor : float or array_like
        Depolarisation correction F_K.
    """
    n = 1.0 + np.asarray(refractivity, dtype=np.float64)
    wl_cm = np.asarray(wavelength_um, dtype=np.float64) * 1.0e-4
    lorentz = (n * n - 1.0) / (n * n + 2.0)
    return 24.0 * np.pi ** 3 / (LOSCHMIDT_CM3 ** 2 * wl_cm ** 4) * lorentz ** 2 * king_factor


def he_rayleigh_cross_section(wavelength_um) -> np.ndarray:
    """He Rayleigh cross section in cm² (refractive-index form, Mansfield & Peck 1969)."""
    return refractive_rayleigh_cross_section(wavelength_um, he_refractivity(wavelength_um))


def rayleigh_opacity(wavelength_um, vmr_h2, vmr_he, mmw_amu) -> np.ndarray:
    """Rayleigh-scattering mass opacity of H₂ + He, counted as extinction.

    Parameters
    ----------
    wavelength_um : ndarray (n_w,)
    vmr_h2, vmr_he, mmw_amu : ndarray (n_levels,)

    Returns
    -------
    ndarray (n_levels, n_w)
        κ in cm² g⁻¹.
    """
    wl = np.atleast_1d(np.asarray(wavelength_um, dtype=np.float64))
    per_gram = 1.0 / (np.atleast_1d(np.asarray(mmw_amu, dtype=np.float64)) * AMU_CGS)
    abundances = np.column_stack([np.broadcast_to(vmr_h2, per_gram.shape) * per_gram,
                                  np.broadcast_to(vmr_he, per_gram.shape) * per_gram])     # (n_levels, 2)
    # one matrix product instead of two outer products and a sum (hot path)
    return abundances @ np.stack([h2_rayleigh_cross_section(wl), he_rayleigh_cross_section(wl)])
