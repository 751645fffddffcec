"""Potassium and sodium: resonance and near-infrared lines with van der Waals broadening.

Method
------
* Lines: the K I and Na I transitions in 0.59–1.26 µm listed in
  :data:`LINES` (vacuum wavenumber, lower-level energy and degeneracy, gf).
  Strength per atom S(T) = (π e²/m_e c²) g f exp(-c2 E''/T)
  (1 - exp(-c2 ν/T)) / Q(T) (common practice; e.g. Gray 2005, The
  Observation and Analysis of Stellar Photospheres, eq. 11.12).
* Width: van der Waals (impact) broadening in Unsöld's approximation:
  full width Γ₆ = 8.08 C₆^(2/5) v̄^(3/5) N_p (rad s⁻¹; Unsöld 1955,
  Physik der Sternatmosphären, §82; Gray 2005 eq. 11.29) for each perturber
  p ∈ {H2, He}, with v̄ = sqrt(8kT/πμ) and
  C₆ = 0.3e-30 [1/(I - E_u)² - 1/(I - E_l)²] (α_p / α_H) cm⁶ s⁻¹ (energies in
  eV; Gray 2005 eq. 11.30, scaled from H to the perturber by the ratio of
  polarisabilities, α_H = 0.667, α_H2 = 0.806, α_He = 0.205 Å³ — values from
  memory) plus natural broadening (Γ_rad = Σ A) and Doppler broadening.
  Perturber densities: the H2/He broadening gas at the solar ratio,
  N = P/kT.
* Far wings (the approximation used here, stated plainly): the pseudo-Voigt
  core is kept out to a detuning Δ_c = 30 cm⁻¹ (T/500 K)^0.6; beyond it the
  Lorentzian is multiplied by exp(-(|Δ| - Δ_c) / Δ_w) with Δ_w = kT/(2hc)
  (≈ 350 cm⁻¹ at 1000 K), symmetric in red and blue, and dropped beyond
  6000 cm⁻¹.  The form of the cut-off (Lorentz to a detuning that grows with
  T, then a Boltzmann-like decay) is motivated by Burrows, Marley & Sharp
  (2000, ApJ 531, 438) and by the quasi-static profiles of Allard et al.
  (2016, A&A 589, A21; 2019, A&A 628, A120), which it does not reproduce in
  detail (no satellite features, no red/blue asymmetry).  Expect the K and
  Na wing opacity far from the doublets to be uncertain by a factor of a few.
* Q(T): sum over the lowest levels in :data:`LEVELS` (ground-state
  dominated: Q = 2.00–2.02 up to 3000 K).

Sources of constants
--------------------
Level energies, wavenumbers and gf values: NIST Atomic Spectra Database
(Kramida et al., NIST ASD v5) — values from memory, rounded to the digits
given.  Ionisation energies: K 4.3407 eV, Na 5.1391 eV (NIST ASD, values from
memory).  The constant 8.08 and the C₆ formula: Unsöld (1955) as given by
Gray (2005) — values from memory.
"""
from __future__ import annotations

import numpy as np

from ...constants import AMU_CGS, C2_CM_K, C_CGS, HE_TO_H2_SOLAR, H_CGS, K_B_CGS, MASS_AMU
from .binning import doppler_hwhm, profile_interval, pseudo_voigt_params

#: π e² / (m_e c²) in cm (classical electron radius × π; CODATA, common practice).
PI_E2_MC2_CM = np.pi * 2.8179403262e-13
EV_CM = 8065.54  # cm^-1 per eV (CODATA 2018)
IONISATION_EV = {"K": 4.3407, "Na": 5.1391}
POLARISABILITY_A3 = {"H": 0.667, "H2": 0.806, "He": 0.205}
PERTURBER_MASS = {"H2": 2.01588, "He": 4.002602}

#: element -> list of (label, wavenumber cm^-1 (vacuum), E_lower cm^-1, g_lower, gf, A_upper_total s^-1)
#: NIST ASD values (from memory); wavenumbers are differences of the level energies in LEVELS (the K and
#: Na 3d 2D terms are inverted: 2D5/2 below 2D3/2).  A_upper_total is the radiative width of the upper level.
LINES = {
    "K": [
        ("K I 0.7665 (4s-4p3/2)", 13042.896, 0.0, 2, 1.364, 3.8e7),
        ("K I 0.7699 (4s-4p1/2)", 12985.186, 0.0, 2, 0.680, 3.7e7),
        ("K I 1.1693 (4p1/2-3d3/2)", 8551.802, 12985.186, 2, 1.78, 2.0e7),
        ("K I 1.1776 (4p3/2-3d5/2)", 8491.784, 13042.896, 4, 3.16, 2.0e7),
        ("K I 1.1773 (4p3/2-3d3/2)", 8494.092, 13042.896, 4, 0.36, 2.0e7),
        ("K I 1.2436 (4p1/2-5s)", 8041.365, 12985.186, 2, 0.36, 1.1e7),
        ("K I 1.2526 (4p3/2-5s)", 7983.655, 13042.896, 4, 0.72, 1.1e7),
    ],
    "Na": [
        ("Na I 0.5892 (3s-3p3/2, D2)", 16973.366, 0.0, 2, 1.282, 6.16e7),
        ("Na I 0.5898 (3s-3p1/2, D1)", 16956.170, 0.0, 2, 0.640, 6.14e7),
        ("Na I 0.8186 (3p1/2-3d3/2)", 12216.717, 16956.170, 2, 1.72, 6.3e7),
        ("Na I 0.8197 (3p3/2-3d5/2)", 12199.471, 16973.366, 4, 3.10, 6.3e7),
        ("Na I 1.1385 (3p1/2-4s)", 8783.829, 16956.170, 2, 0.326, 2.6e7),
        ("Na I 1.1407 (3p3/2-4s)", 8766.633, 16973.366, 4, 0.652, 2.6e7),
    ],
}

#: element -> (energy cm^-1, degeneracy 2J+1) of the lowest levels (NIST ASD, values from memory).
LEVELS = {
    "K": [(0.0, 2), (12985.186, 2), (13042.896, 4), (21026.551, 2), (21534.680, 6), (21536.988, 4),
          (24701.382, 2), (24720.139, 4), (27397.077, 4), (27398.147, 6), (27450.710, 2),
          (28127.85, 14)],
    "Na": [(0.0, 2), (16956.170, 2), (16973.366, 4), (25739.999, 2), (29172.837, 6), (29172.887, 4),
           (30266.99, 2), (30272.58, 4), (33200.673, 2), (34548.731, 4), (34548.764, 6), (34586.92, 14)],
}


def partition_function(temperature, element: str = "K"):
    """Q(T) = Σ g exp(-c2 E/T) over :data:`LEVELS` of ``element``."""
    t = np.atleast_1d(np.asarray(temperature, dtype=np.float64))
    e = np.array([x[0] for x in LEVELS[element]])
    g = np.array([x[1] for x in LEVELS[element]], dtype=np.float64)
    q = np.sum(g[None, :] * np.exp(-C2_CM_K * e[None, :] / t[:, None]), axis=1)
    return q if np.ndim(temperature) else float(q[0])


def line_strengths(element: str, temperature: float) -> np.ndarray:
    """S(T) per atom (cm atom⁻¹) of each line in :data:`LINES`."""
    nu = np.array([x[1] for x in LINES[element]])
    el = np.array([x[2] for x in LINES[element]])
    gf = np.array([x[4] for x in LINES[element]])
    q = partition_function(temperature, element)
    return PI_E2_MC2_CM * gf * np.exp(-C2_CM_K * el / temperature) * -np.expm1(-C2_CM_K * nu / temperature) / q


def c6_unsold(element: str, e_lower_cm: float, e_upper_cm: float, perturber: str) -> float:
    """Unsöld C₆ (cm⁶ s⁻¹) for a perturber (Gray 2005 eq. 11.30, polarisability-scaled)."""
    ion = IONISATION_EV[element]
    el, eu = e_lower_cm / EV_CM, e_upper_cm / EV_CM
    c6_h = 0.3e-30 * (1.0 / (ion - eu) ** 2 - 1.0 / (ion - el) ** 2)
    return c6_h * POLARISABILITY_A3[perturber] / POLARISABILITY_A3["H"]


def vdw_hwhm(element: str, temperature: float, pressure_bar: float) -> np.ndarray:
    """van der Waals + natural HWHM (cm⁻¹) of each line, H2/He at the solar ratio."""
    n_tot = pressure_bar * 1e6 / (K_B_CGS * temperature)
    fractions = {"H2": 1.0 / (1.0 + HE_TO_H2_SOLAR), "He": HE_TO_H2_SOLAR / (1.0 + HE_TO_H2_SOLAR)}
    m_atom = MASS_AMU[element]
    out = []
    for _, nu, el, _, _, a_tot in LINES[element]:
        gamma = a_tot  # natural full width, rad s^-1
        for pert, frac in fractions.items():
            mu = m_atom * PERTURBER_MASS[pert] / (m_atom + PERTURBER_MASS[pert]) * AMU_CGS
            vbar = np.sqrt(8.0 * K_B_CGS * temperature / (np.pi * mu))
            c6 = c6_unsold(element, el, el + nu, pert)
            gamma += 8.08 * c6 ** 0.4 * vbar ** 0.6 * frac * n_tot
        out.append(gamma / (2.0 * np.pi * C_CGS) / 2.0)
    return np.array(out)


def wing_cutoff_cm(temperature: float) -> float:
    """Detuning Δ_c (cm⁻¹) where the Lorentz core ends (see module docstring)."""
    return 30.0 * (temperature / 500.0) ** 0.6


def cross_section(wavelength_edges_um, temperatures_K, pressures_bar, element: str = "K",
                  n_sub: int = 16, max_detuning_cm: float = 6000.0) -> np.ndarray:
    """Bin-averaged σ (cm² atom⁻¹), shape (n_P, n_T, n_w), wavelength ascending.

    Core: exact bin integral of the truncated pseudo-Voigt (:mod:`.binning`).
    Wing: midpoint rule with ``n_sub`` points per bin (the wing varies on
    scales ≥ Δ_c ≥ 30 cm⁻¹, wider than the bins near the lines).
    """
    nu_edges = 1e4 / np.asarray(wavelength_edges_um, dtype=np.float64)[::-1]
    lo, hi = nu_edges[:-1], nu_edges[1:]
    width = hi - lo
    frac = (np.arange(n_sub) + 0.5) / n_sub
    sub = lo[:, None] + width[:, None] * frac[None, :]          # (n_w, n_sub)
    centres = np.array([x[1] for x in LINES[element]])
    temps, press = list(temperatures_K), list(pressures_bar)
    out = np.zeros((len(press), len(temps), lo.size))
    for it, t in enumerate(temps):
        s = line_strengths(element, t)
        gd = doppler_hwhm(centres, t, MASS_AMU[element])
        cut = wing_cutoff_cm(t)
        decay = 0.5 * K_B_CGS * t / (H_CGS * C_CGS)
        for ip, p in enumerate(press):
            gl = vdw_hwhm(element, t, p)
            fwhm, eta = pseudo_voigt_params(gd, gl)
            for k, nu0 in enumerate(centres):
                a = np.clip(lo - nu0, -cut, cut)
                b = np.clip(hi - nu0, -cut, cut)
                core = profile_interval(a, b, np.full(lo.size, fwhm[k]), np.full(lo.size, eta[k]))
                det = np.abs(sub - nu0)
                lor = gl[k] / np.pi / (det ** 2 + gl[k] ** 2)
                wing = np.where((det > cut) & (det < max_detuning_cm), lor * np.exp(-(det - cut) / decay), 0.0)
                out[ip, it] += s[k] * (core + wing.mean(axis=1) * width)
    return (out / width)[:, :, ::-1]
