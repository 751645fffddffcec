"""Ammonia (¹⁴NH₃) line list: symmetric top with inversion doubling, band model of the NIR bands.

Method
------
* **Levels**: oblate symmetric top (:mod:`.symmetric_top`) with quartic
  distortion; every vibrational level is an inversion pair (s, a).  The
  umbrella (ν2) ladder uses measured s/a term values up to v2 = 4 (ground
  splitting 0.79 cm⁻¹, v2 = 1 splitting 35.7 cm⁻¹) and a constant spacing
  of 650 cm⁻¹ per inversion level above.  Other modes add ν_i v_i + x_ij
  terms, with the inversion splitting of the ν2 level they sit on.  The
  inversion splitting is taken independent of J and K (its J, K dependence
  is ≲ 0.05 cm⁻¹ in the ground state and a few cm⁻¹ in v2 = 1 at J ~ 15),
  and all vibrational states use the ground-state rotational constants
  (line positions at high J are then off by several cm⁻¹: adequate at
  R ≲ 1000).
* **Selection rules**: parallel bands (A1 upper state; ΔK = 0) connect
  s ↔ a, perpendicular bands (E upper state; ΔK = ±1, first-order
  Coriolis ζ) connect s ↔ s and a ↔ a (Herzberg 1945, *Infrared and Raman
  Spectra*, sec. IV.4(c)).  ΔJ = 0, ±1.
* **Spin statistics** (HITRAN convention, incl. the ¹⁴N spin factor 3):
  weight 12 for K = 0 and K = 3n, 6 for K ≠ 3n per inversion component;
  K = 0 levels exist only as a for even J and as s for odd J (the J = 1 ← 0
  line at 572.498 GHz is 1₀ s ← 0₀ a; Townes & Schawlow 1955, *Microwave
  Spectroscopy*, ch. 12 — value from memory; checked in the tests).
  Degenerate vibrational states are given the same rule (approximation).
* **Intensities**: S = (8π³/3hc) ν |R|² g_ns A_HL e^{-c2 E''/T}
  (1 - e^{-c2 ν/T}) / Q(T), symmetric-top Hönl–London factors, |R|² per
  band from its literature strength S_band(296 K); hot bands from every
  vibrational level below ``HOT_LOWER_MAX`` = 4000 cm⁻¹ (both inversion
  components) with the harmonic scaling of :func:`harmonic_factor` and no
  anharmonic shift from the umbrella mode; bands that change v2 start from
  the ground pair only.
* **Truncations** (chosen to keep ~3e5 lines): the hot-band lower levels
  hold 97.6% of the molecules at 1000 K, 64% at 2000 K and 31% at 3000 K,
  and J'' ≤ 22 keeps 99.2%, 89% and 74% of a band's strength at those
  temperatures, so band strengths are too low by up to these factors at
  the hot end of the grid (where NH₃ is not expected to be abundant).
* **Abundance**: strengths are abundance-weighted (HITRAN convention),
  ¹⁴NH₃ abundance 0.995872 (HITRAN isotopologue table as carried by
  hapi.ISO; checked in the tests).
* **Partition function**: direct sum over the rotational levels (J ≤ 45)
  of all vibration–inversion levels below 18000 cm⁻¹ (agrees with TIPS 2021
  within 1.8% over 296–3000 K, tests/test_builtin_nh3.py).

Sources of constants (cm⁻¹)
---------------------------
* Ground state B = 9.9443, C = 6.2280, D_J = 8.54e-4, D_JK = -1.58e-3,
  D_K = 9.5e-4 (Urban et al. 1984, J. Mol. Spectrosc. 106, 29 — values
  from memory).
* Umbrella ladder 0s 0, 0a 0.793, 1s 932.43, 1a 968.12, 2s 1597.47, 2a
  1882.18, 3s 2384.15, 3a 2895.61, 4s 3462.0, 4a 4055.0; fundamentals
  ν1 3336.2/3337.1, ν3 3443.6/3444.0, ν4 1626.3/1627.4; 2ν4(l=2)
  3240.2; ν2+ν4 2540.5/2586.1 (Herzberg 1945 table 54; Kleiner et al. 1999,
  J. Mol. Spectrosc. 193, 46; HITRAN2020 band centres — values from memory).
* Coriolis ζ3 = 0.067, ζ4 = -0.22; x_ij as in ``XIJ`` (from the overtone
  and combination origins above and ν1+ν3 ≈ 6680 — values from memory).
* Band strengths S_band(296 K), cm molecule⁻¹ (``BANDS``): ν4 3.8e-18;
  ν1 5.0e-19, ν3 5.5e-19, 2ν4 1.9e-19 (3 µm); ν2+ν4 4.0e-20; 2 µm
  combinations 1.1e-19 in total; 1.5 µm 4.5e-20 in total; 1.0 µm 2.0e-21
  in total (HITRAN2020 band sums and Yurchenko et al. 2011 BYTe
  integrated intensities — values from memory, uncertain by a factor ~2
  for the combination and overtone bands).
* Broadening: γ_H2 = 0.080 cm⁻¹ atm⁻¹, n_H2 = 0.60; γ_He = 0.035,
  n_He = 0.45 at 296 K (typical NH₃–H₂ / NH₃–He values, e.g. Pine et al.
  1993, J. Quant. Spectrosc. Radiat. Transfer 50, 337 — values from memory).
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
from .symmetric_top import SymmetricTopConstants, energy, transitions

SPECIES = "NH3"
ABUNDANCE = 0.995872
T_REF = 296.0
INTENSITY_PREFACTOR = 8.0 * np.pi ** 3 / (3.0 * H_CGS * C_CGS) * 1e-36  # |R|² in D²

GROUND = dict(B=9.9443, C=6.2280, DJ=8.54e-4, DJK=-1.58e-3, DK=9.5e-4)
ZETA = {3: 0.067, 4: -0.22}
#: inversion ladder of the umbrella mode: index n = 2 v2 + (0 for s, 1 for a)
UMBRELLA = (0.0, 0.793, 932.43, 968.12, 1597.47, 1882.18, 2384.15, 2895.61, 3462.0, 4055.0)
UMBRELLA_SPACING_ABOVE = 650.0
#: fundamentals of the other modes (s component) and their degeneracies
NU = {1: 3336.2, 3: 3443.6, 4: 1626.3}
DEGENERACY = {1: 1, 3: 2, 4: 2}
XIJ = {(1, 1): -20.0, (3, 3): -18.0, (4, 4): -6.5, (1, 3): -100.0, (1, 4): -8.0, (3, 4): -18.0}
#: perpendicular character of a vibrational upper state: E if it carries an odd number of E quanta
#: or an l = 2 overtone; BANDS lists (Δv = (v1, v2, v3, v4), parallel?, ζ, S296, label)
BANDS = (
    ((0, 0, 0, 1), False, ZETA[4], 3.8e-18, "nu4"),
    ((0, 2, 0, 0), True, 0.0, 1.0e-19, "2nu2"),
    ((0, 1, 0, 1), False, ZETA[4], 4.0e-20, "nu2+nu4"),
    ((0, 0, 0, 2), False, 0.0, 1.6e-19, "2nu4"),
    ((1, 0, 0, 0), True, 0.0, 5.0e-19, "nu1"),
    ((0, 0, 1, 0), False, ZETA[3], 5.5e-19, "nu3"),
    ((1, 1, 0, 0), True, 0.0, 1.0e-20, "nu1+nu2"),
    ((0, 1, 1, 0), False, ZETA[3], 1.0e-20, "nu2+nu3"),
    ((1, 0, 0, 1), False, ZETA[4], 5.0e-20, "nu1+nu4"),
    ((0, 0, 1, 1), False, 0.0, 4.0e-20, "nu3+nu4"),
    ((1, 0, 0, 2), False, 0.0, 5.0e-21, "nu1+2nu4"),
    ((1, 0, 1, 0), False, ZETA[3], 2.5e-20, "nu1+nu3"),
    ((0, 0, 2, 0), False, 0.0, 8.0e-21, "2nu3"),
    ((0, 0, 1, 2), False, 0.0, 4.0e-21, "nu3+2nu4"),
    ((2, 0, 1, 0), False, 0.0, 1.0e-21, "2nu1+nu3"),
    ((1, 0, 2, 0), False, 0.0, 1.0e-21, "nu1+2nu3"),
)
#: hot bands start from every vibrational level (both inversion components) below this, cm⁻¹
HOT_LOWER_MAX = 4000.0
BROADENING = {"gamma_h2": 0.080, "n_h2": 0.60, "gamma_he": 0.035, "n_he": 0.45}

J_MAX_PARTITION = 45
E_VIB_MAX_PARTITION = 18000.0


def umbrella_level(n: int) -> float:
    """Energy of inversion level n = 2 v2 + (0 s | 1 a) of the umbrella ladder, cm⁻¹."""
    if n < len(UMBRELLA):
        return UMBRELLA[n]
    return UMBRELLA[-1] + UMBRELLA_SPACING_ABOVE * (n - len(UMBRELLA) + 1)


def term_value(v, inversion: int) -> float:
    """G(v, s=0 | a=1), cm⁻¹ above the ground 0s level."""
    v1, v2, v3, v4 = v
    g = umbrella_level(2 * v2 + inversion)
    q = {1: v1, 3: v3, 4: v4}
    for i, n in q.items():
        g += NU[i] * n
    for (i, j), x in XIJ.items():
        g += x * (q[i] * (q[i] - 1) if i == j else q[i] * q[j])
    return g


def degeneracy(v) -> int:
    """Vibrational degeneracy (isotropic 2-D oscillators for ν3, ν4)."""
    return (v[2] + 1) * (v[3] + 1)


def spin_weight(j, k, inversion) -> np.ndarray:
    """Weight of level (J, |K|, s|a) incl. ±K; 0 for the K = 0 components that do not exist."""
    j, k, inv = (np.asarray(x) for x in (j, k, inversion))
    w = np.where(k % 3 == 0, 12.0, 6.0)
    missing = (k == 0) & ((j + inv) % 2 == 0)   # K = 0: a for even J, s for odd J
    return np.where(missing, 0.0, w)


# ---------------------------------------------------------------- partition function
def _rot_const(v=None) -> SymmetricTopConstants:
    return SymmetricTopConstants(**GROUND)


@functools.lru_cache(maxsize=1)
def _rot_levels():
    """Rotational levels (J, |K|) with energies and weights for the s and a components."""
    j, k = np.array([(jj, kk) for jj in range(J_MAX_PARTITION + 1) for kk in range(jj + 1)]).T
    e = energy(_rot_const(), j, k)
    return e, (2 * j + 1) * spin_weight(j, k, 0), (2 * j + 1) * spin_weight(j, k, 1)


def _vib_levels(e_max: float):
    out = []
    for v in itertools.product(range(7), range(26), range(7), range(12)):
        for inv in (0, 1):
            g = term_value(v, inv)
            if g < e_max:
                out.append((v, inv, g))
    return out


@functools.lru_cache(maxsize=1)
def _partition_table():
    levels = _vib_levels(E_VIB_MAX_PARTITION)
    g = np.array([x[2] for x in levels])
    d = np.array([degeneracy(x[0]) for x in levels], dtype=float)
    inv = np.array([x[1] for x in levels])
    return g, d, inv


def _q_rot(temperature: float):
    e, ws, wa = _rot_levels()
    boltz = np.exp(-C2_CM_K * e / temperature)
    return float(np.sum(ws * boltz)), float(np.sum(wa * boltz))


def partition_function(temperature_K):
    """Total internal partition function Q(T) of ¹⁴NH₃ (HITRAN spin convention), vectorised."""
    t = np.asarray(temperature_K, dtype=np.float64)
    g, d, inv = _partition_table()
    out = []
    for ti in np.atleast_1d(t).ravel():
        qs, qa = _q_rot(ti)
        out.append(np.sum(d * np.exp(-C2_CM_K * g / ti) * np.where(inv == 0, qs, qa)))
    q = np.array(out)
    return float(q[0]) if t.ndim == 0 else q.reshape(t.shape)


def ground_pair_fraction(temperature_K: float) -> float:
    """Fraction of molecules in the ground inversion pair (0s + 0a) at T."""
    qs, qa = _q_rot(temperature_K)
    return (qs + qa * math.exp(-C2_CM_K * UMBRELLA[1] / temperature_K)) / partition_function(temperature_K)


register_partition_function(SPECIES, partition_function)


# ---------------------------------------------------------------- bands
def transition_moment_sq(delta) -> float:
    """|R|² (D²) of a cold band from its S_band(296 K)."""
    band = [b for b in BANDS if b[0] == tuple(delta)][0]
    nu0 = 0.5 * (term_value(delta, 0) + term_value(delta, 1))
    stim = -math.expm1(-C2_CM_K * nu0 / T_REF)
    return band[3] / (INTENSITY_PREFACTOR * nu0 * stim * ground_pair_fraction(T_REF))


def harmonic_factor(lower, delta) -> float:
    """Strength of (lower + Δ <- lower) per lower sublevel relative to (Δ <- 0), harmonic.

    Π over modes and added quanta of (v_i + d_i + k - 1)/(d_i + k - 1) for a
    d_i-fold degenerate mode (exact for Δv = 1 of an isotropic oscillator;
    common practice, no source).
    """
    f = 1.0
    for n, dv, d in zip(lower, delta, (1, 1, DEGENERACY[3], DEGENERACY[4])):
        for k in range(1, dv + 1):
            f *= (n + d + k - 1) / (d + k - 1)
    return f


def hot_lower_states():
    """Vibrational levels (s component below HOT_LOWER_MAX) that start hot bands."""
    levels = sorted({v for v, inv, g in _vib_levels(HOT_LOWER_MAX) if inv == 0}, key=lambda v: term_value(v, 0))
    return [v for v in levels if any(v)]


def band_list(hot_bands: bool = True):
    """Inversion sub-bands: dicts with lower, upper, lower/upper inversion, parallel, ζ, |R|², label."""
    lowers = [(0, 0, 0, 0)] + (hot_lower_states() if hot_bands else [])
    out = []
    for delta, parallel, zeta, _s, label in BANDS:
        r2 = transition_moment_sq(delta)
        for low in lowers:
            if any(low) and delta[1] != 0:
                continue   # umbrella-changing bands only from the ground pair (ladder not harmonic)
            up = tuple(a + b for a, b in zip(low, delta))
            for inv_lo in (0, 1):
                inv_up = 1 - inv_lo if parallel else inv_lo
                out.append(dict(label=label if not any(low) else f"{label} hot from {low}",
                                lower=low, upper=up, inv_lo=inv_lo, inv_up=inv_up, parallel=parallel,
                                zeta=zeta, r2=r2 * degeneracy(low) * harmonic_factor(low, delta),
                                g_lo=term_value(low, inv_lo), g_up=term_value(up, inv_up)))
    return out


@functools.lru_cache(maxsize=4)
def _transitions(j_max: int, perpendicular: bool):
    tr = transitions(j_max, perpendicular)
    # ±K'' give identical lines: keep K'' > 0 (doubled) and K'' = 0 once per |ΔK|
    keep = (tr["k_lo"] > 0) | ((tr["k_lo"] == 0) & (tr["k_up"] >= 0))
    tr = {k: v[keep] for k, v in tr.items()}
    doubled = ~((tr["k_lo"] == 0) & (tr["k_up"] == 0))
    tr["mult"] = np.where(doubled, 2.0, 1.0)
    return tr


def band_lines(band: dict, max_j: int):
    """Lines of one inversion sub-band: (ν, E'', S(296 K)) arrays."""
    tr = _transitions(max_j, not band["parallel"])
    const = _rot_const()
    up_const = SymmetricTopConstants(**{**GROUND, "zeta": band["zeta"]})
    l_up = 0 if band["parallel"] else np.sign(tr["k_up"] - tr["k_lo"])
    e_lo = energy(const, tr["j_lo"], tr["k_lo"])
    e_up = energy(up_const, tr["j_up"], tr["k_up"], l_up)
    nu = band["g_up"] + e_up - band["g_lo"] - e_lo
    # weight per signed K'' state: the level weight shared by ±K
    w_level = spin_weight(tr["j_lo"], np.abs(tr["k_lo"]), band["inv_lo"])
    w_state = np.where(tr["k_lo"] == 0, w_level, 0.5 * w_level)
    if band["parallel"]:   # A1 upper state: its missing K' = 0 components take no lines
        w_state = w_state * (spin_weight(tr["j_up"], np.abs(tr["k_up"]), band["inv_up"]) > 0)
    el = band["g_lo"] + e_lo
    q_ref = partition_function(T_REF)
    s = (INTENSITY_PREFACTOR * nu * band["r2"] * w_state * tr["hl"] * tr["mult"]
         * np.exp(-C2_CM_K * el / T_REF) * -np.expm1(-C2_CM_K * nu / T_REF) / q_ref) * ABUNDANCE
    good = (s > 0) & (nu > 0)
    return nu[good], el[good], s[good]


def line_list(max_j: int = 22, wn_min: float = 1500.0, wn_max: float = 13000.0,
              min_strength: float = 1e-26, check_temperatures=(296.0, 1000.0, 3000.0),
              hot_bands: bool = True) -> LineList:
    """¹⁴NH₃ line list (strengths at 296 K, HITRAN form).

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
        Include bands from excited vibrational levels (``HOT_LOWER_MAX``).
    """
    return assemble_line_list((band_lines(band, max_j) for band in band_list(hot_bands)), species=SPECIES, isotopologue="14N-1H3",
                              abundance=ABUNDANCE, t_ref=T_REF, partition=partition_function,
                              broadening=BROADENING, wn_min=wn_min, wn_max=wn_max,
                              min_strength=min_strength, check_temperatures=check_temperatures)
