"""H⁻ continuum opacity (bound–free and free–free).

Cross sections and free–free coefficients are the fits of T. L. John
(1988, A&A 193, 189), eqs. (4)–(6) and Table 3:

* bound–free, 0.125 µm ≤ λ ≤ λ₀ = 1.6419 µm (photo-detachment threshold)::

      σ_bf(λ) = 10⁻¹⁸ λ³ (1/λ − 1/λ₀)^{3/2} Σ_{n=1..6} C_n (1/λ − 1/λ₀)^{(n−1)/2}   [cm², λ in µm]

  (a fit to the calculations of Wishart 1979);
* free–free, λ > 0.1823 µm, 1400 K ≤ T ≤ 10080 K (a fit to Bell & Berrington 1987)::

      k_ff(λ, T) = 10⁻²⁹ Σ_{n=1..6} θ^{(n+1)/2} (A_n λ² + B_n + C_n/λ + D_n/λ² + E_n/λ³ + F_n/λ⁴),
      θ = 5040 K / T                                                        [cm⁴ dyn⁻¹]

  per neutral H atom and per unit electron pressure; the stimulated-emission
  correction is already included.

Number densities: the H⁻ density follows from the Saha equation for
H + e⁻ ⇌ H⁻ with statistical weights g(H⁻)=1, g(H)=2, g(e⁻)=2 and binding
energy 0.754195 eV (Lykke, Murray & Lineberger 1991, Phys. Rev. A 43, 6104)::

      n(H⁻) = n_H n_e (1/4) (h² / 2π m_e k_B T)^{3/2} exp(χ / k_B T).

:func:`thermal_h_and_electron_vmr` supplies atomic-H and electron mixing
ratios from a simple equilibrium approximation (documented there) for users
who do not provide them.
"""
from __future__ import annotations

import astropy.constants as _c
import numpy as np

from ..constants import AMU_CGS, BAR_TO_DYN_CM2, C2_CM_K, H_CGS, HE_TO_H2_SOLAR, K_B_CGS

M_E_CGS = _c.m_e.cgs.value                 # electron mass, g (CODATA 2018 via astropy)
EV_CGS = _c.e.si.value * 1.0e7              # 1 eV in erg

HMINUS_THRESHOLD_UM = 1.6419               # John (1988), λ₀
HMINUS_BINDING_EV = 0.754195               # Lykke, Murray & Lineberger (1991)

# John (1988) eq. (5) / Table: bound–free coefficients C_1..C_6
_BF_C = np.array([152.519, 49.534, -118.858, 92.536, -34.194, 4.982])

# John (1988) Table 3 free–free coefficients; rows n = 1..6, columns A, B, C, D, E, F.
# (The two sets join continuously at 0.3645 µm and reproduce Bell & Berrington's
# table; both are checked in tests/test_continuum.py.)
# λ > 0.3645 µm:
_FF_LONG = np.array([
    [0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
    [2483.3460, 285.8270, -2054.2910, 2827.7760, -1341.5370, 208.9520],
    [-3449.8890, -1158.3820, 8746.5230, -11485.6320, 5303.6090, -812.9390],
    [2200.0400, 2427.7190, -13651.1050, 16755.5240, -7510.4940, 1132.7380],
    [-696.2710, -1841.4000, 8624.9700, -10051.5300, 4400.0670, -655.0200],
    [88.2830, 444.5170, -1863.8640, 2095.2880, -901.7880, 132.9850],
])
# 0.1823 µm < λ ≤ 0.3645 µm:
_FF_SHORT = np.array([
    [518.1021, -734.8666, 1021.1775, -479.0721, 93.1373, -6.4285],
    [473.2636, 1443.4137, -1977.3395, 922.3575, -178.9275, 12.3600],
    [-482.2089, -737.1616, 1096.8827, -521.1341, 101.7963, -7.0571],
    [115.5291, 169.6374, -245.6490, 114.2430, -21.9972, 1.5097],
    [0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
    [0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
])
_FF_SPLIT_UM = 0.3645
_FF_MIN_UM = 0.1823
_FF_T_RANGE = (1400.0, 10080.0)   # John (1988): validity of the free–free fit


def hminus_bound_free_cross_section(wavelength_um) -> np.ndarray:
    """H⁻ photo-detachment cross section (John 1988, eq. 4–5).

    Parameters
    ----------
    wavelength_um : array_like
        Wavelength in µm.

    Returns
    -------
    ndarray
        Cross section in cm² per H⁻ ion; zero at and beyond λ₀ = 1.6419 µm.
        Below 0.125 µm the fit is evaluated outside its stated range
        (irrelevant for infrared work).
    """
    wl = np.asarray(wavelength_um, dtype=np.float64)
    x = np.clip(1.0 / wl - 1.0 / HMINUS_THRESHOLD_UM, 0.0, None)
    root = np.sqrt(x)
    series = np.zeros_like(x)
    for coefficient in _BF_C[::-1]:          # Horner in √x
        series = series * root + coefficient
    return 1.0e-18 * wl ** 3 * x * root * series


def hminus_free_free_coefficient(wavelength_um, temperature_K) -> np.ndarray:
    """H⁻ free–free absorption coefficient (John 1988, eq. 6, Table 3).

    Parameters
    ----------
    wavelength_um : array_like (n_w,)
    temperature_K : array_like (n_levels,)

    Returns
    -------
    ndarray (n_levels, n_w)
        k_ff in cm⁴ dyn⁻¹ per neutral H atom per unit electron pressure,
        stimulated emission included.  Zero below 0.1823 µm (outside the fit).
        Temperatures are clamped to the fit's range 1400–10080 K: below
        1400 K the fit's polynomial in θ is not trustworthy, and there the
        electron pressure makes H⁻ negligible anyway.
    """
    wl = np.atleast_1d(np.asarray(wavelength_um, dtype=np.float64))
    temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
    return _ff_theta_powers(temperature) @ _ff_wavelength_matrix(wl)


def _ff_theta_powers(temperature: np.ndarray) -> np.ndarray:
    """θ^{(n+1)/2}, n = 1..6, shape (n_levels, 6), T clamped to the fit's range."""
    theta = 5040.0 / np.clip(temperature, *_FF_T_RANGE)
    return theta[:, None] ** ((np.arange(1, 7) + 1) / 2.0)[None, :]


def _ff_wavelength_matrix(wl: np.ndarray) -> np.ndarray:
    """(6, n_w) matrix M with k_ff = θ-powers @ M: the λ polynomials of John's fit, ×1e-29."""
    safe_wl = np.maximum(wl, _FF_MIN_UM)
    basis = np.stack([safe_wl ** 2, np.ones_like(safe_wl), 1 / safe_wl,
                      safe_wl ** -2, safe_wl ** -3, safe_wl ** -4])          # (6, n_w)
    matrix = np.where(wl > _FF_SPLIT_UM, _FF_LONG @ basis, _FF_SHORT @ basis)
    return 1.0e-29 * np.where(wl >= _FF_MIN_UM, matrix, 0.0)


def hminus_saha_factor(temperature_K) -> np.ndarray:
    """n(H⁻) / (n_H n_e) in cm³ from the Saha equation (binding energy 0.754195 eV).

    Parameters
    ----------
    temperature_K : array_like

    Returns
    -------
    ndarray
    """
    temperature = np.asarray(temperature_K, dtype=np.float64)
    thermal = (H_CGS ** 2 / (2.0 * np.pi * M_E_CGS * K_B_CGS * temperature)) ** 1.5
    return 0.25 * thermal * np.exp(HMINUS_BINDING_EV * EV_CGS / (K_B_CGS * temperature))


def hminus_opacity(wavelength_um, temperature_K, pressure_bar, mmw_amu, vmr_h, vmr_e) -> np.ndarray:
    """H⁻ bound–free plus free–free mass opacity.

    Parameters
    ----------
    wavelength_um : ndarray (n_w,)
    temperature_K, pressure_bar, mmw_amu, vmr_h, vmr_e : ndarray (n_levels,)
        Temperature, pressure, mean molecular weight (amu) and the volume
        mixing ratios of neutral atomic hydrogen and free electrons.

    Returns
    -------
    ndarray (n_levels, n_w)
        κ in cm² g⁻¹.  The bound–free part carries the stimulated-emission
        factor 1 − exp(−hc/λkT); the free–free fit already includes it.
    """
    wl = np.atleast_1d(np.asarray(wavelength_um, dtype=np.float64))
    temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
    pressure_cgs = np.asarray(pressure_bar, dtype=np.float64) * BAR_TO_DYN_CM2
    number_density = pressure_cgs / (K_B_CGS * temperature)
    n_h = np.asarray(vmr_h, dtype=np.float64) * number_density
    n_e = np.asarray(vmr_e, dtype=np.float64) * number_density
    electron_pressure = n_e * K_B_CGS * temperature
    density = pressure_cgs * np.asarray(mmw_amu, dtype=np.float64) * AMU_CGS / (K_B_CGS * temperature)
    # per-level factors first, so the (n_levels, n_w) work is one exp, one matmul and two passes
    bf_level = hminus_saha_factor(temperature) * n_h * n_e / density
    ff_level = electron_pressure * n_h / density
    # hc/(λ k T) with λ in cm = C2 [cm K] / (λ_µm 1e-4 T); 1 - exp(-x) is the stimulated-emission factor
    kappa = np.multiply.outer(1.0 / temperature, -C2_CM_K / (wl * 1.0e-4))
    np.exp(kappa, out=kappa)
    kappa -= 1.0
    kappa *= -hminus_bound_free_cross_section(wl)
    kappa *= bf_level[:, None]
    kappa += (_ff_theta_powers(temperature) * ff_level[:, None]) @ _ff_wavelength_matrix(wl)
    return kappa


# ---------------------------------------------------------------------------
# Equilibrium H and e⁻ for the H⁻ continuum
# ---------------------------------------------------------------------------
# H2 ground-state constants (Huber & Herzberg 1979, "Constants of Diatomic
# Molecules"): dissociation energy from v=0, J=0 (Liu et al. 2009, J. Chem.
# Phys. 130, 174306: 36118.07 cm⁻¹ = 4.4781 eV), rotational constant B₀ and
# fundamental vibrational spacing ΔG(1/2).
H2_DISSOCIATION_CM = 36118.07
H2_B0_CM = 59.322
H2_DG_HALF_CM = 4161.17

# Solar abundances, log ε (H = 12), Asplund et al. (2009, ARA&A 47, 481), Table 1.
SOLAR_LOG_EPS = {"Na": 6.24, "K": 5.03}
# First ionisation energies in eV (NIST Atomic Spectra Database).
IONISATION_EV = {"H": 13.598434, "Na": 5.139076, "K": 4.340663}
# Ground-term statistical weights g(ion)/g(neutral) used as partition-function
# ratios (adequate below ~4000 K where excited states are hardly populated).
_G_RATIO = {"H": 1.0 / 2.0, "Na": 1.0 / 2.0, "K": 1.0 / 2.0}


def h2_dissociation_constant(temperature_K) -> np.ndarray:
    """K_n = n_H² / n_H₂ in cm⁻³ for H₂ ⇌ 2H.

    Statistical mechanics with the constants above: translational partition
    functions of H and H₂, electronic weight 2 for H(²S) and 1 for H₂(X¹Σg⁺),
    rigid-rotor rotational sum in its high-temperature expansion
    kT/(σ hcB₀) (1 + hcB₀/3kT) with σ = 2, and a harmonic vibrational sum
    with the fundamental spacing; energies measured from H₂(v=0, J=0), so the
    Boltzmann factor uses D₀ (nuclear spin weights cancel).  Expected to be
    good to ~10 % over 1000–4000 K, where rotation–vibration coupling and
    anharmonicity start to matter at higher T.

    Parameters
    ----------
    temperature_K : array_like

    Returns
    -------
    ndarray
    """
    temperature = np.asarray(temperature_K, dtype=np.float64)
    m_h = 1.00782503 * AMU_CGS
    m_h2 = 2.0 * m_h
    trans = (2.0 * np.pi * K_B_CGS * temperature / H_CGS ** 2) ** 1.5
    x_rot = C2_CM_K * H2_B0_CM / temperature
    q_rot = (1.0 + x_rot / 3.0) / (2.0 * x_rot)
    q_vib = 1.0 / -np.expm1(-C2_CM_K * H2_DG_HALF_CM / temperature)
    ratio_trans = (m_h ** 2 / m_h2) ** 1.5 * trans
    return ratio_trans * 4.0 / (q_rot * q_vib) * np.exp(-C2_CM_K * H2_DISSOCIATION_CM / temperature)


def saha_ionisation_factor(element: str, temperature_K) -> np.ndarray:
    """S = n₊ n_e / n₀ in cm⁻³ from the Saha equation with ground-term weights."""
    temperature = np.asarray(temperature_K, dtype=np.float64)
    thermal = (2.0 * np.pi * M_E_CGS * K_B_CGS * temperature / H_CGS ** 2) ** 1.5
    return 2.0 * _G_RATIO[element] * thermal * np.exp(-IONISATION_EV[element] * EV_CGS / (K_B_CGS * temperature))


def _electron_density(totals: list[np.ndarray], factors: list[np.ndarray]) -> np.ndarray:
    """Solve the charge balance n_e = Σ N_i S_i / (n_e + S_i) for n_e.

    The right-hand side decreases with n_e, so the root is unique.  It is
    bracketed by n_e ≤ min(√(Σ N_i S_i), Σ N_i) and, inserting that upper
    bound on the right, n_e ≥ Σ N_i S_i / (upper + S_i).  Newton steps in
    ln n_e, falling back to bisection when a step leaves the bracket.
    """
    factors = [np.maximum(s, 1e-300) for s in factors]   # avoid log(0) in very cold layers
    upper_n = np.minimum(np.sqrt(sum(n * s for n, s in zip(totals, factors))), sum(totals))
    upper = np.log(upper_n)
    lower = np.log(sum(n * s / (upper_n + s) for n, s in zip(totals, factors)))
    u = 0.5 * (lower + upper)
    for _ in range(60):
        n_e = np.exp(u)
        terms = [n * s / (n_e + s) for n, s in zip(totals, factors)]
        supply = sum(terms)
        residual = np.log(supply) - u                          # decreasing in u
        slope = -sum(t * n_e / (n_e + s) for t, s in zip(terms, factors)) / supply - 1.0
        upper = np.where(residual < 0, u, upper)
        lower = np.where(residual > 0, u, lower)
        step = u - residual / slope
        u = np.where((step >= lower) & (step <= upper), step, 0.5 * (lower + upper))
        if np.all(np.abs(residual) < 1e-13):
            break
    return np.exp(u)


def thermal_h_and_electron_vmr(temperature_K, pressure_bar) -> tuple[np.ndarray, np.ndarray]:
    """Atomic-H and free-electron volume mixing ratios for the H⁻ continuum.

    An equilibrium approximation for a solar H/He gas, used only to feed
    :func:`hminus_opacity`:

    * H from the H₂ ⇌ 2H dissociation equilibrium,
      :func:`h2_dissociation_constant` (D₀ = 4.4781 eV with partition
      functions), He at the solar He/H ratio (Asplund et al. 2009);
    * electrons from the Saha ionisation of Na and K at solar abundance
      (Asplund et al. 2009, Table 1; log ε = 6.24 and 5.03) and of atomic H,
      with ground-term partition functions, solved with charge balance.
      Depletion of Na and K into condensates, and other electron donors,
      are ignored.

    Parameters
    ----------
    temperature_K, pressure_bar : array_like (n_levels,)

    Returns
    -------
    vmr_h, vmr_e : ndarray (n_levels,)
        Number fractions relative to all particles.
    """
    temperature = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
    n_total = np.atleast_1d(np.asarray(pressure_bar, dtype=np.float64)) * BAR_TO_DYN_CM2 / (K_B_CGS * temperature)
    he_per_h_nucleus = HE_TO_H2_SOLAR / 2.0
    # n_total = n_H (1 + He/H) + n_H2 (1 + 2 He/H) with n_H2 = n_H² / K: positive root written
    # without dividing by K, which underflows to 0 in very cold layers
    k_n = np.maximum(h2_dissociation_constant(temperature), 1e-300)
    c = 1.0 + 2.0 * he_per_h_nucleus
    b = 1.0 + he_per_h_nucleus
    n_h = 2.0 * n_total * k_n / (b * k_n + np.sqrt((b * k_n) ** 2 + 4.0 * c * n_total * k_n))
    n_h2 = (n_total - b * n_h) / c
    h_nuclei = n_h + 2.0 * n_h2
    totals = [n_h] + [10.0 ** (SOLAR_LOG_EPS[el] - 12.0) * h_nuclei for el in ("Na", "K")]
    factors = [saha_ionisation_factor(el, temperature) for el in ("H", "Na", "K")]
    n_e = _electron_density(totals, factors)
    n_h_neutral = n_h * n_e / (n_e + factors[0])
    return n_h_neutral / n_total, n_e / n_total
