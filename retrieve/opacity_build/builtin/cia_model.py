"""A physical model of H2–H2 and H2–He collision-induced absorption (CIA).

Model
-----
The absorption coefficient per pair density, α(ν, T) / (n₁ n₂) in cm⁵, is a
sum over the H2 transitions that collisions make dipole-allowed:

    α/(n₁n₂) = Σ_bands C_b Σ_k w_k(T) ν (1 - e^{-c2 ν/T}) G(ν - ν_k; T)

* Transitions ν_k: H2 levels E(v, J) from its Dunham constants (Huber &
  Herzberg 1979 — values from memory).  Per band (rototranslational Δv = 0,
  fundamental Δv = 1 near 2.4 µm, first overtone Δv = 2 near 1.2 µm, second
  overtone Δv = 3 near 0.85 µm) the components are
  - overlap (isotropic) induction: Q_v(J) lines (ΔJ = 0; at ν = 0 for the
    translational band), weight 1;
  - quadrupolar induction: S_v(J), O_v(J) and Q_v(J) lines with the
    Clebsch–Gordan weights (J 2 J' | 0 0 0)² (Van Kranendonk 1957, Physica
    23, 825; Frommhold 1993, Collision-induced Absorption in Gases, ch. 5);
  - for H2–H2 only, double transitions Q_v(J) + S_0(J') in the fundamental.
  Relative shares of the three mechanisms per band are model parameters
  (:data:`BANDS`), chosen from the shapes of published spectra (values from
  memory).
* Populations w_k: Boltzmann over E(v'', J'') for v'' ≤ 2 with ortho/para
  nuclear-spin weights 3 (odd J) and 1 (even J) (equilibrium H2, common
  practice), times the harmonic vibrational factor (v''+1)…(v''+Δv)/Δv!.
* Line shape G: the Birnbaum–Cohen function (Birnbaum & Cohen 1976, Can. J.
  Phys. 54, 593, eq. 11), which includes detailed balance
  G(-ω) = e^{-ħω/kT} G(ω) through τ₀ = ħ/2kT; τ₁ = 1/(2πc δ) with a
  half-width δ ∝ sqrt(T) (collision duration ∝ 1/mean speed), τ₂ = τ₁.
  Each component is normalised numerically to unit area.
* Normalisation C_b: the integrated coefficient ∫ α/(n₁n₂) dν of each band at
  297 K equals :data:`INTEGRATED_297` (cm⁴).  The temperature dependence then
  comes from populations, widths and the ν(1 - e^{-c2ν/T}) factor; the
  zeroth spectral moment per collision is held fixed (an approximation).

Sources and accuracy
--------------------
Band integrated intensities at 297 K are values from memory, informed by the
measurements and ab initio tabulations of Abel, Frommhold, Li & Hunt (2011,
J. Phys. Chem. A 115, 6805; 2012, J. Chem. Phys. 136, 044319) and Borysow
(2002, A&A 390, 779) for H2–H2, and Abel et al. (2012) for H2–He; they are
uncertain by up to a factor ~2, and the band shapes (no intercollisional dip,
no bound-dimer features) by more in the windows between bands.  Use real CIA
tables (HITRAN CIA, Karman et al. 2019, Icarus 328, 160) for science.
"""
from __future__ import annotations

import functools

import numpy as np
from scipy.special import k1e

from ...constants import C2_CM_K, C_CGS, H_CGS, K_B_CGS

# H2 X 1Σg+ Dunham coefficients, cm^-1 (Huber & Herzberg 1979; values from memory)
Y_H2 = {(1, 0): 4401.213, (2, 0): -121.336, (3, 0): 0.8129, (0, 1): 60.8530, (1, 1): -3.0622,
        (0, 2): -0.04712, (1, 2): 0.00135}
J_MAX = 15
V_LOWER_MAX = 2
T_REF = 297.0

#: pair -> band -> (Δv, share overlap-Q, share quadrupolar, share double, δ_overlap, δ_quad at 297 K cm^-1)
BANDS = {
    "H2-H2": {"rt": (0, 0.15, 0.85, 0.0, 180.0, 50.0),
              "fundamental": (1, 0.55, 0.30, 0.15, 150.0, 60.0),
              "overtone1": (2, 0.70, 0.30, 0.0, 160.0, 70.0),
              "overtone2": (3, 0.70, 0.30, 0.0, 170.0, 80.0)},
    "H2-He": {"rt": (0, 0.30, 0.70, 0.0, 220.0, 60.0),
              "fundamental": (1, 0.60, 0.40, 0.0, 180.0, 70.0),
              "overtone1": (2, 0.70, 0.30, 0.0, 190.0, 80.0),
              "overtone2": (3, 0.70, 0.30, 0.0, 200.0, 90.0)},
}

#: pair -> band -> ∫ α/(n₁n₂) dν at 297 K, cm⁴ (values from memory, see docstring).
INTEGRATED_297 = {
    "H2-H2": {"rt": 3.0e-42, "fundamental": 1.0e-42, "overtone1": 1.7e-44, "overtone2": 8.0e-46},
    "H2-He": {"rt": 1.2e-42, "fundamental": 4.0e-43, "overtone1": 7.0e-45, "overtone2": 3.5e-46},
}

_NU_FINE = np.arange(0.0, 16000.0, 1.0) + 0.5   # integration grid for normalisation, cm^-1


def h2_energy(v, j):
    """E(v, J) of H2 in cm^-1 above (0, 0), Dunham expansion."""
    vh = np.asarray(v, float) + 0.5
    jj = np.asarray(j, float)
    jj = jj * (jj + 1.0)
    e = sum(c * vh ** k * jj ** l for (k, l), c in sorted(Y_H2.items()))
    e0 = sum(c * 0.5 ** k * 0.0 ** l for (k, l), c in sorted(Y_H2.items()) if l == 0)
    return e - e0


def _cg2(j: np.ndarray, jp: np.ndarray) -> np.ndarray:
    """(J 2 J' | 0 0 0)² for J' = J+2, J, J-2."""
    j = j.astype(float)
    out = np.zeros(j.shape)
    up, same, down = jp == j + 2, jp == j, jp == j - 2
    out[up] = 3.0 * (j[up] + 1) * (j[up] + 2) / (2.0 * (2 * j[up] + 1) * (2 * j[up] + 3))
    js = j[same]
    out[same] = np.where(js > 0, js * (js + 1) / ((2 * js - 1) * (2 * js + 3)), 0.0)
    out[down] = 3.0 * j[down] * (j[down] - 1) / (2.0 * (2 * j[down] - 1) * (2 * j[down] + 1))
    return out


def _populations(temperature: float):
    """Normalised populations of (v, J), v ≤ V_LOWER_MAX, J ≤ J_MAX, with o/p weights."""
    v, j = np.meshgrid(np.arange(V_LOWER_MAX + 1), np.arange(J_MAX + 1), indexing="ij")
    g = np.where(j % 2 == 1, 3.0, 1.0) * (2 * j + 1.0)
    w = g * np.exp(-C2_CM_K * h2_energy(v, j) / temperature)
    return v.ravel(), j.ravel(), (w / w.sum()).ravel()


def components(pair: str, band: str, temperature: float):
    """Line components of one band: (ν_k, weight_k, mechanism) with mechanism 'overlap' or 'quad'."""
    dv, s_ovl, s_quad, s_dbl, _, _ = BANDS[pair][band]
    v, j, pop = _populations(temperature)
    from math import comb
    vib = np.array([comb(int(x) + dv, dv) for x in v], dtype=float)
    nus, ws, mech = [], [], []
    # overlap-induced Q lines (translational band at ν = 0 when dv = 0)
    nus.append(h2_energy(v + dv, j) - h2_energy(v, j))
    ws.append(s_ovl * pop * vib)
    mech.append(np.zeros(v.size, dtype=int))
    # quadrupole-induced O, Q, S lines
    quad_parts = []
    for dj in (-2, 0, 2):
        jp = j + dj
        ok = jp >= 0
        cg = np.where(ok, _cg2(j, np.maximum(jp, 0)), 0.0)
        quad_parts.append((h2_energy(v + dv, np.maximum(jp, 0)) - h2_energy(v, j), pop * vib * cg))
    q_tot = sum(w.sum() for _, w in quad_parts)
    for nu, w in quad_parts:
        nus.append(nu)
        ws.append(s_quad * w / q_tot)
        mech.append(np.ones(v.size, dtype=int))
    if s_dbl > 0:
        # Q_dv(J1) + S_0(J2) on two colliding molecules
        q_nu = h2_energy(v + dv, j) - h2_energy(v, j)
        s0_nu = h2_energy(v, j + 2) - h2_energy(v, j)
        s0_w = pop * _cg2(j, j + 2)
        nu2 = (q_nu[:, None] + s0_nu[None, :]).ravel()
        w2 = ((pop * vib)[:, None] * s0_w[None, :]).ravel()
        nus.append(nu2)
        ws.append(s_dbl * w2 / w2.sum())
        mech.append(np.ones(nu2.size, dtype=int))
    nu = np.concatenate(nus)
    w = np.concatenate(ws)
    m = np.concatenate(mech)
    keep = (w > 1e-12) & (nu >= 0)
    return nu[keep], w[keep], m[keep]


def birnbaum_cohen(delta_cm: np.ndarray, tau1: float, tau2: float, temperature: float) -> np.ndarray:
    """Birnbaum–Cohen spectral function of detuning Δ (cm⁻¹), unnormalised.

    G(ω) ∝ exp(τ₂/τ₁ + τ₀ω) z K₁(z) / (1 + ω²τ₁²), z = sqrt((1 + ω²τ₁²)(τ₂² + τ₀²))/τ₁,
    ω = 2πcΔ, τ₀ = ħ/2kT (Birnbaum & Cohen 1976, eq. 11).
    """
    omega = 2.0 * np.pi * C_CGS * delta_cm
    tau0 = H_CGS / (2.0 * np.pi) / (2.0 * K_B_CGS * temperature)
    a = 1.0 + (omega * tau1) ** 2
    z = np.sqrt(a * (tau2 ** 2 + tau0 ** 2)) / tau1
    # K1(z) = k1e(z) e^{-z}; combine exponents to avoid overflow
    return z * k1e(z) * np.exp(tau2 / tau1 + tau0 * omega - z) / a


def _half_width(delta_297: float, temperature: float) -> float:
    return delta_297 * np.sqrt(temperature / T_REF)


def _band_spectrum(pair: str, band: str, nu: np.ndarray, temperature: float) -> np.ndarray:
    """Un-normalised α shape of one band on wavenumbers ``nu``."""
    _, _, _, _, d_ovl, d_quad = BANDS[pair][band]
    centres, weights, mech = components(pair, band, temperature)
    out = np.zeros(nu.size)
    for kind, width in ((0, d_ovl), (1, d_quad)):
        sel = mech == kind
        if not sel.any():
            continue
        tau1 = 1.0 / (2.0 * np.pi * C_CGS * _half_width(width, temperature))
        norm = _shape_norm(tau1, temperature)
        for c, w in zip(centres[sel], weights[sel]):
            out += w * birnbaum_cohen(nu - c, tau1, tau1, temperature) / norm
    return out * nu * -np.expm1(-C2_CM_K * nu / temperature)


@functools.lru_cache(maxsize=256)
def _shape_norm(tau1: float, temperature: float) -> float:
    """Area of the Birnbaum–Cohen function over detuning (cm⁻¹), trapezoid on a wide grid."""
    d = np.linspace(-20000.0, 20000.0, 400001)
    return float(np.trapezoid(birnbaum_cohen(d, tau1, tau1, temperature), d))


@functools.lru_cache(maxsize=16)
def _band_scale(pair: str, band: str) -> float:
    """C_b such that ∫ α/(n₁n₂) dν at 297 K equals INTEGRATED_297."""
    shape = _band_spectrum(pair, band, _NU_FINE, T_REF)
    return INTEGRATED_297[pair][band] / float(np.sum(shape) * (_NU_FINE[1] - _NU_FINE[0]))


def cia_wavenumber(pair: str, nu_cm: np.ndarray, temperature: float, bands=None) -> np.ndarray:
    """α/(n₁n₂) in cm⁵ molecule⁻² at wavenumbers ``nu_cm`` and one temperature."""
    if pair not in BANDS:
        raise KeyError(f"unknown CIA pair {pair!r}; choose from {sorted(BANDS)}")
    nu = np.asarray(nu_cm, dtype=np.float64)
    bands = sorted(BANDS[pair]) if bands is None else bands
    return sum(_band_scale(pair, b) * _band_spectrum(pair, b, nu, temperature) for b in bands)


def cia_coefficient(pair: str, wavelength_um, temperatures_K, edges_um=None, n_sub: int = 4) -> np.ndarray:
    """Bin-averaged (over wavenumber) α/(n₁n₂), cm⁵ molecule⁻², shape (n_T, n_w).

    With ``edges_um`` each bin is averaged over ``n_sub`` equally spaced
    wavenumbers (components are ≥ 50 cm⁻¹ wide, bins ≤ 13 cm⁻¹); otherwise
    the coefficient is sampled at the bin centres.
    """
    if edges_um is None:
        nu = 1e4 / np.asarray(wavelength_um, dtype=np.float64)
        return np.array([cia_wavenumber(pair, nu, t) for t in temperatures_K])
    nu_e = 1e4 / np.asarray(edges_um, dtype=np.float64)
    frac = (np.arange(n_sub) + 0.5) / n_sub
    nu = (nu_e[:-1, None] + (nu_e[1:] - nu_e[:-1])[:, None] * frac[None, :]).ravel()
    return np.array([cia_wavenumber(pair, nu, t).reshape(-1, n_sub).mean(axis=1) for t in temperatures_K])
