"""Methane (¹²CH₄) line list: spherical-top F2 bands and a pseudo-band model of the polyads.

Method
------
* **Rotational structure** (:mod:`.spherical_top`): E(J) = B J(J+1) -
  D J²(J+1)², tetrahedral splittings neglected, first-order Coriolis
  coupling ζ in the upper F2 level; P, Q, R lines (ΔR = 0) with rotational
  factor W(J'') (2J'+1)/3, W from the O-group species counts and the A:E:F
  = 5:2:3 nuclear-spin weights.  One line per (J'', branch) manifold: the
  tetrahedral components (< 1 cm⁻¹ apart at J ≲ 20) are merged, which leaves
  band-averaged cross sections at R ≲ 1000 unchanged but makes the line
  peaks (and correlated-k extremes) sharper than reality.
* **Bands**: the ν3 fundamental with its literature constants, and each
  polyad (Pentad 3.3 µm, Octad 2.2–2.4 µm, Tetradecad 1.7 µm, Icosad 1.4 µm,
  Triacontad 1.15 µm) as a few pseudo-bands, each treated as an F2
  fundamental-like band with an effective origin, effective upper-state B
  and ζ, and an integrated strength (the documented band-model
  simplification).  The real polyads hold hundreds of interacting
  sub-bands; the pseudo-bands reproduce where the absorption lies and how
  strong it is, not the line-by-line structure.
* **Hot bands**: every pseudo-band also starts from each excited
  vibrational level below ``HOT_LOWER_MAX`` cm⁻¹, shifted by the
  anharmonic constants and with the harmonic-oscillator strength scaling
  for a d-fold degenerate mode, Π_k (v_i + d_i + k - 1)/(d_i + k - 1) per
  added quantum (exact for Δv = 1 of an isotropic oscillator; common
  practice, no source), times the lower-level vibrational degeneracy.
  With ``HOT_LOWER_MAX`` = 7500 cm⁻¹ the lower levels hold 99.7% of the
  molecules at 1000 K, 93% at 1500 K, 77% at 2000 K and 49% at 3000 K: band
  strengths are too low by up to these factors at the hot end of the grid.
  J'' ≤ 50 (default) keeps 99.2% of a band's strength at 3000 K and
  stays below J ≈ 60, where the quartic D term alone would fold the R
  branches back into spurious heads (the sextic term is omitted).
* **Intensities**: S = (8π³/3hc) ν |R|² g_v'' f_harm F_rot e^{-c2 E''/T}
  (1 - e^{-c2 ν/T}) / Q(T), with |R|² of each cold pseudo-band derived from
  its strength S_band(296 K) = (8π³/3hc) ν0 |R|² (1 - e^{-c2 ν0/T}) / Q_vib.
  Abundance-weighted (HITRAN convention), ¹²CH₄ abundance 0.988274 (HITRAN
  isotopologue table as carried by hapi.ISO; checked in the tests).
* **Partition function**: Q = Q_vib Q_rot; Q_rot the direct sum over the
  ground-state levels (J ≤ 120) with W(J); Q_vib the sum over the
  vibrational levels below ``E_VIB_MAX_PARTITION`` = 12000 cm⁻¹ from the
  anharmonic term formula with their degeneracies, each with a rotational
  factor (B0/B_v)^{3/2} for the vibration–rotation constants α.  The
  vibrational cut-off is a calibration: with it Q agrees with TIPS 2021
  (hapi.partitionSum(6, 1, T)) within 2.1% over 296–2500 K, which keeps the
  line strengths consistent with HITRAN-convention data.  Summing all
  levels of the term formula to 18000 cm⁻¹ would give Q 8% higher at
  2000 K and 26% higher at 2500 K; the true high-T value is uncertain by
  that much (TIPS appears to miss highly excited levels).

Calibration against HITRAN2020 (``../shared/reference/hitran/ch4_nu3``)
-----------------------------------------------------------------------
These parameters were fitted to the real ν3 / hot-band / 2ν3 files and are
checked in tests/test_builtin_ch4.py:

* ``NU3_HERMAN_WALLIS`` = 0.0060: the P/R asymmetry of the ν3 band
  (HITRAN2020: P 2.66e-18, Q 3.55e-18, R 4.60e-18 cm molecule⁻¹).
* ``X34``, ``X23``: the effective hot-band shifts of ν3+ν4 ← ν4 and
  ν2+ν3 ← ν2 (strength-weighted centres 3021.9 and 3017.8 cm⁻¹ against
  3031.1 cm⁻¹ for ν3 at 296 K).
* The 2ν3 (F2) pseudo-band origin 6004.63 cm⁻¹, B' = 5.17 and ζ = -0.036
  from its R(0), P(1), Q(1) lines, and its strength 6.6e-20 cm molecule⁻¹
  and Herman–Wallis a = 0.0123 from a least-squares fit to the 11
  single-component (A-species) lines of the partial HITRAN 2ν3 file, each
  scaled to its J manifold by W(J'')/5 (rms residual 14%, worst line 52%).
  The memory value (2.9e-20) was 2.3 times too small.

Residuals after calibration (296 K): ν3 integrated strength +2.3%; P, Q, R
branch sums +0.3%, +1.1%, +4.3%; R = 100 envelope within -14%…+5% per bin
where the band exceeds 10% of its peak; hot/fundamental ratios ×1.06
(ν3+ν4 ← ν4) and ×1.10 (ν2+ν3 ← ν2); strength-weighted centres within
1.3 cm⁻¹; 2ν3 manifold strengths rms 14% (scale 1.00), positions within
2 cm⁻¹.  All other polyad strengths are values from memory (see below):
uncertain by up to a factor ~2, and the pseudo-bands reproduce band
positions and integrated strengths, not the line-by-line structure.

Sources of constants
--------------------
* B0 = 5.24104, D0 = 1.1097e-4 cm⁻¹; ν3 = 3019.493 cm⁻¹, B(ν3) = 5.1995,
  ζ3 = 0.0467; fundamentals ν1 = 2916.48, ν2 = 1533.33, ν4 = 1310.76 cm⁻¹;
  α_i ≈ 0.01–0.04 cm⁻¹ (Hilico et al. 1987 / Champion et al. 1992, J. Mol.
  Spectrosc.; Herzberg 1945, table 52 — values from memory).
* Anharmonic constants x_ij (cm⁻¹; x_ii from the overtone origins 2ν2
  3063.6, 2ν3(F2) 6004.6, 2ν4(F2) 2614.3; x_24, x_14 from ν2+ν4 2830.3,
  ν1+ν4 4223.5; x_13 from Gray & Robiette 1979, Mol. Phys. 37, 1901 —
  values from memory).
* Band strengths at 296 K (cm molecule⁻¹): ν3 1.10e-17 (HITRAN band sum,
  value from memory); Pentad ν2+ν4 2.6e-19, 2ν4 7.0e-20; Octad ν3+ν4
  2.2e-19, ν1+ν4 6.0e-20, ν2+ν3 4.0e-20, ν2+2ν4 1.3e-20, 3ν4 1.0e-20;
  Tetradecad other than 2ν3: 2.5e-20 in total; Icosad 1.4e-20; Triacontad
  6.0e-21 (HITRAN2020 polyad totals, Gordon et al. 2022 / Rey et al. 2018
  TheoReTS — values from memory, factor ~2).
* Broadening: γ_H2 = 0.060 cm⁻¹ atm⁻¹, n_H2 = 0.60; γ_He = 0.045,
  n_He = 0.45 at 296 K (typical CH₄–H₂ / CH₄–He measurements, e.g.
  Pine 1992, J. Chem. Phys. 97, 773 — values from memory).
"""
from __future__ import annotations

import functools
import itertools
import math

import numpy as np

from ...constants import C2_CM_K, C_CGS, H_CGS
from ..linelist import LineList
from .assemble import assemble_line_list
from ..partition import register_partition_function
from .spherical_top import f2_band, rotational_energy, spin_weight_sum

SPECIES = "CH4"
ABUNDANCE = 0.988274
T_REF = 296.0
INTENSITY_PREFACTOR = 8.0 * np.pi ** 3 / (3.0 * H_CGS * C_CGS) * 1e-36  # |R|² in D²

B0, D0 = 5.24104, 1.1097e-4
#: fundamentals ν1..ν4 (cm⁻¹) and their degeneracies (A1, E, F2, F2)
NU = (2916.48, 1533.33, 3019.493, 1310.76)
DEGENERACY = (1, 2, 3, 3)
#: vibration–rotation constants α_i (B_v = B0 - Σ α_i v_i), values from memory
ALPHA_B = (0.018, -0.010, 0.0415, 0.018)
#: anharmonic constants (G = Σ ν_i v_i + Σ x_ii v_i(v_i-1) + Σ_{i<j} x_ij v_i v_j)
X11, X22, X33, X44 = -9.4, -1.5, -17.2, -3.6
X12, X13, X14, X23, X24, X34 = -2.0, -75.0, -3.7, -13.3, -13.8, -9.2
ZETA3, B_NU3 = 0.0467, 5.1995
NU3_HERMAN_WALLIS = 0.0060

HOT_LOWER_MAX = 7500.0
E_VIB_MAX_PARTITION = 12000.0
J_MAX_PARTITION = 120
BROADENING = {"gamma_h2": 0.060, "n_h2": 0.60, "gamma_he": 0.045, "n_he": 0.45}

#: pseudo-bands: name -> (Δv, origin cm⁻¹ or None for the term formula, S296, B_up or None, ζ, HW a)
PSEUDO_BANDS = {
    # Pentad, 3.3 µm
    "nu3": ((0, 0, 1, 0), 3019.493, 1.10e-17, B_NU3, ZETA3, NU3_HERMAN_WALLIS),
    "nu2+nu4": ((0, 1, 0, 1), 2830.32, 2.6e-19, None, 0.0, 0.0),
    "2nu4": ((0, 0, 0, 2), 2614.26, 7.0e-20, None, 0.0, 0.0),
    # Octad, 2.2-2.4 µm
    "nu3+nu4": ((0, 0, 1, 1), 4319.2, 2.2e-19, None, 0.0, 0.0),
    "nu1+nu4": ((1, 0, 0, 1), 4223.46, 6.0e-20, None, 0.0, 0.0),
    "nu2+nu3": ((0, 1, 1, 0), 4537.6, 4.0e-20, None, 0.0, 0.0),
    "nu2+2nu4": ((0, 1, 0, 2), None, 1.3e-20, None, 0.0, 0.0),
    "3nu4": ((0, 0, 0, 3), None, 1.0e-20, None, 0.0, 0.0),
    # Tetradecad, 1.6-1.8 µm (2nu3 calibrated on HITRAN2020, see docstring)
    "2nu3": ((0, 0, 2, 0), 6004.63, 6.6e-20, 5.17, -0.036, 0.0123),
    "nu3+2nu4": ((0, 0, 1, 2), None, 1.0e-20, None, 0.0, 0.0),
    "nu2+nu3+nu4": ((0, 1, 1, 1), None, 8.0e-21, None, 0.0, 0.0),
    "nu1+nu3": ((1, 0, 1, 0), None, 7.0e-21, None, 0.0, 0.0),
    # Icosad, 1.3-1.45 µm
    "2nu3+nu4": ((0, 0, 2, 1), None, 6.0e-21, None, 0.0, 0.0),
    "nu2+2nu3": ((0, 1, 2, 0), None, 4.5e-21, None, 0.0, 0.0),
    "nu1+nu3+nu4": ((1, 0, 1, 1), None, 3.5e-21, None, 0.0, 0.0),
    # Triacontad, 1.1-1.2 µm
    "2nu3+2nu4": ((0, 0, 2, 2), None, 2.0e-21, None, 0.0, 0.0),
    "nu2+2nu3+nu4": ((0, 1, 2, 1), None, 2.0e-21, None, 0.0, 0.0),
    "3nu3": ((0, 0, 3, 0), None, 2.0e-21, None, 0.0, 0.0),
}


def term_value(v) -> float:
    """Vibrational term value G(v) above the ground state, cm⁻¹ (anharmonic formula)."""
    v1, v2, v3, v4 = v
    g = NU[0] * v1 + NU[1] * v2 + NU[2] * v3 + NU[3] * v4
    g += X11 * v1 * (v1 - 1) + X22 * v2 * (v2 - 1) + X33 * v3 * (v3 - 1) + X44 * v4 * (v4 - 1)
    g += X12 * v1 * v2 + X13 * v1 * v3 + X14 * v1 * v4 + X23 * v2 * v3 + X24 * v2 * v4 + X34 * v3 * v4
    return g


def degeneracy(v) -> int:
    """Total vibrational degeneracy of the level set (v1 v2 v3 v4) (isotropic oscillators)."""
    return math.prod(math.comb(n + d - 1, n) for n, d in zip(v, DEGENERACY))


def b_value(v) -> float:
    """Rotational constant B_v = B0 - Σ α_i v_i, cm⁻¹."""
    return B0 - sum(a * n for a, n in zip(ALPHA_B, v))


def harmonic_factor(lower, delta) -> float:
    """Strength of (lower + Δ <- lower) per lower sublevel relative to (Δ <- 0), harmonic."""
    f = 1.0
    for n, dv, d in zip(lower, delta, DEGENERACY):
        for k in range(1, dv + 1):
            f *= (n + d + k - 1) / (d + k - 1)
    return f


def _vib_levels(e_max: float):
    out = []
    for v in itertools.product(range(7), range(13), range(7), range(15)):
        g = term_value(v)
        if g < e_max:
            out.append((v, g))
    return out


# ---------------------------------------------------------------- partition function
@functools.lru_cache(maxsize=1)
def _partition_tables():
    levels = _vib_levels(E_VIB_MAX_PARTITION)
    g_vib = np.array([g for _, g in levels])
    deg = np.array([degeneracy(v) * (B0 / b_value(v)) ** 1.5 for v, _ in levels])
    j = np.arange(J_MAX_PARTITION + 1)
    e_rot = rotational_energy(j, B0, D0)
    g_rot = (2 * j + 1) * spin_weight_sum(j)
    return g_vib, deg, e_rot, g_rot


def vibrational_partition(temperature_K):
    """Q_vib(T) (with the (B0/B_v)^1.5 rotational factor of each level)."""
    g_vib, deg, _, _ = _partition_tables()
    t = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
    return np.array([np.sum(deg * np.exp(-C2_CM_K * g_vib / ti)) for ti in t])


def rotational_partition(temperature_K):
    """Q_rot(T) of the ground state, spin weights included."""
    _, _, e_rot, g_rot = _partition_tables()
    t = np.atleast_1d(np.asarray(temperature_K, dtype=np.float64))
    return np.array([np.sum(g_rot * np.exp(-C2_CM_K * e_rot / ti)) for ti in t])


def partition_function(temperature_K):
    """Total internal partition function Q(T) of ¹²CH₄ (HITRAN spin convention), vectorised."""
    t = np.asarray(temperature_K, dtype=np.float64)
    q = vibrational_partition(t) * rotational_partition(t)
    return float(q[0]) if t.ndim == 0 else q.reshape(t.shape)


register_partition_function(SPECIES, partition_function)


# ---------------------------------------------------------------- bands
def _cold_vib_partition() -> float:
    return float(vibrational_partition(T_REF)[0])


def transition_moment_sq(name: str) -> float:
    """|R|² (D²) of a cold pseudo-band from its S_band(296 K)."""
    delta, origin, s296, *_ = PSEUDO_BANDS[name]
    nu0 = origin if origin is not None else term_value(delta)
    stim = -math.expm1(-C2_CM_K * nu0 / T_REF)
    return s296 * _cold_vib_partition() / (INTENSITY_PREFACTOR * nu0 * stim)


def band_list(hot_bands: bool = True):
    """All bands: dicts with name, lower, upper, origin ν0, B_lo, B_up, ζ, hw, |R|² (incl. g and harmonic factors)."""
    lowers = [(v, g) for v, g in _vib_levels(HOT_LOWER_MAX)] if hot_bands else [((0, 0, 0, 0), 0.0)]
    bands = []
    for name, (delta, origin, _s, b_up, zeta, hw) in PSEUDO_BANDS.items():
        r2 = transition_moment_sq(name)
        nu_cold = origin if origin is not None else term_value(delta)
        b_cold_up = b_up if b_up is not None else b_value(delta)
        for low, g_low in lowers:
            up = tuple(a + d for a, d in zip(low, delta))
            shift = term_value(up) - g_low - term_value(delta)
            bands.append(dict(
                name=name if not any(low) else f"{name} hot from {low}", lower=low, upper=up,
                nu0=nu_cold + shift, e_vib_lo=g_low, b_lo=b_value(low),
                b_up=b_cold_up + (b_value(up) - b_value(delta)), zeta=zeta, hw=hw,
                r2=r2 * harmonic_factor(low, delta) * degeneracy(low)))
    return bands


def band_lines(band: dict, max_j: int):
    """Lines of one band: (ν, E'', S(296 K), dJ) arrays."""
    lines = f2_band(max_j, band["nu0"], band["b_lo"], D0, band["b_up"], D0, band["zeta"], band["hw"])
    nu = lines["nu"]
    el = band["e_vib_lo"] + lines["e_rot_lo"]
    q_ref = partition_function(T_REF)
    s = (INTENSITY_PREFACTOR * nu * band["r2"] * lines["factor"] * np.exp(-C2_CM_K * el / T_REF)
         * -np.expm1(-C2_CM_K * nu / T_REF) / q_ref) * ABUNDANCE
    return nu, el, s, lines["dj"]


def line_list(max_j: int = 50, wn_min: float = 1500.0, wn_max: float = 13000.0,
              min_strength: float = 1e-26, check_temperatures=(296.0, 1000.0, 3000.0),
              hot_bands: bool = True) -> LineList:
    """¹²CH₄ line list (strengths at 296 K, HITRAN form) from the pseudo-band model.

    Parameters
    ----------
    max_j : int
        Highest lower-state J.
    wn_min, wn_max : float
        Wavenumber window, cm⁻¹.
    min_strength : float
        Keep a line if its strength exceeds this (cm molecule⁻¹) at any of
        ``check_temperatures``.
    hot_bands : bool
        Include bands from excited vibrational levels.
    """
    return assemble_line_list((band_lines(band, max_j)[:3] for band in band_list(hot_bands)), species=SPECIES, isotopologue="12C-1H4",
                              abundance=ABUNDANCE, t_ref=T_REF, partition=partition_function,
                              broadening=BROADENING, wn_min=wn_min, wn_max=wn_max,
                              min_strength=min_strength, check_temperatures=check_temperatures)
