"""Water (H₂¹⁶O) line list from effective rotational Hamiltonians and band strengths.

Method
------
* **Rotational levels** of every vibrational state: Watson A-reduced quartic
  Hamiltonian (:mod:`.asymmetric_top`) with the Padé resummation of the K
  series, diagonalised per J in the symmetric-top basis, one D2 block at a
  time.  Lines use J'' ≤ ``max_j`` (default 32); the partition function uses
  J ≤ 50.  Truncation effect on band strengths (ν3 band, relative to
  J'' ≤ 30): J'' ≤ 25 keeps 99.3% at 2000 K and 96.8% at 3000 K; J'' ≤ 20
  keeps 95.8% and 87.5%.  The windows between band systems are fed by the
  high-J tails and converge more slowly: against J'' ≤ 40, R ≈ 10 bin
  averages at 1.26, 1.59 and 2.2 µm with J'' ≤ 25 are 6–16% low at 2000 K
  and 19–33% low at 3000 K; with J'' ≤ 32 they are within 1% at 2000 K and
  within 3% at 3000 K (9% at 1.07 µm).  Q(T) itself is not truncated
  (J ≤ 50) and lies 0.0–3.2% above TIPS 2021 over 296–3000 K
  (tests/test_builtin_h2o.py).
* **Vibrational states**: measured band origins where listed below, otherwise
  the second-order Dunham expansion G(v) = Σ ω_i v_i + Σ_{i≤j} x_ij
  (v_i v_j + (v_i + v_j)/2).  Rotational constants of excited states from
  the ground state and linear vibration–rotation constants α_i (plus a
  quadratic term in v2 for A, whose growth with bending is strongly
  non-linear); Δ_K scaled as ((A - B̄)_v / (A - B̄)_0)⁴ so that the Padé
  asymptote (A - B̄)²/Δ_K falls with bending excitation as the barrier to
  linearity is approached.  The other quartic constants keep their
  ground-state values.  This is the "approximate via α's" simplification:
  line positions are good to a few cm⁻¹ at low J and worse (tens of cm⁻¹)
  at high J / high Ka in bending-excited states — adequate at R ≲ 1000.
  Ground-state check: the J ≤ 3 levels lie within 0.15 cm⁻¹ of the measured
  ones, the J = Ka = 4…8 levels 0.3–8 cm⁻¹ below them (measured values from
  memory, see the tests).
* **Selection rules and spin statistics**: the transition moment lies along
  b for A1 ← A1 bands (Δv3 even; b-type, ΔKa and ΔKc odd) and along a for
  B2 bands (Δv3 odd; a-type, ΔKa even, ΔKc odd); they follow from the
  direction-cosine matrix elements of :func:`.asymmetric_top.honl_london`.
  Nuclear-spin weights (HITRAN convention): 3 (ortho) for Ka + Kc + v3 odd,
  1 (para) otherwise (Herzberg 1945, *Infrared and Raman Spectra*, sec. I.4;
  Bunker & Jensen 2006, *Molecular Symmetry and Spectroscopy* —
  value from memory).
* **Intensities**: each cold band has a constant transition moment |R|²
  (no Herman–Wallis factors), derived from its literature integrated band
  strength S_band(296 K) through ``S_band = (8π³/3hc) ν0 |R|² (1 - e^{-c2 ν0/T})
  / Q_vib(T)``.  Line strengths are then ::

      S = (8π³/3hc) ν |R|² g_ns A_HL e^{-c2 E''/T} (1 - e^{-c2 ν/T}) / Q(T)

  with A_HL the asymmetric-top Hönl–London factor.  Hot bands (lower state
  any of the 13 levels in ``HOT_LOWER``, up to 7445 cm⁻¹, wherever the upper
  level has a listed origin) use the harmonic-oscillator
  scaling |R(v''+Δ ← v'')|² = |R(Δ ← 0)|² Π_i C(v''_i + Δ_i, Δ_i) (common
  practice, no source); the lower states hold 99.97% of the molecules at
  1000 K, 98.5% at 2000 K and 90% at 3000 K.  Strengths are abundance-weighted (HITRAN
  convention), H₂¹⁶O abundance 0.997317 (HITRAN isotopologue table, as
  carried by hapi.ISO; checked in the tests).
* **Partition function**: direct sum over the same levels (J ≤ 50) of all
  vibrational states below 20000 cm⁻¹; see :func:`partition_function`.

Sources of constants (all cm⁻¹)
-------------------------------
* Ground state A, B, C, Δ_J, Δ_JK, Δ_K, δ_J, δ_K: Camy-Peyret & Flaud (1985,
  in *Molecular Spectroscopy: Modern Research* III, ch. 3, table 3) /
  De Lucia et al. (1974, J. Phys. Chem. Ref. Data 3, 211) — values from
  memory, rounded.
* α_i for A, B, C: differences of the (100), (010), (001) constants of
  Flaud & Camy-Peyret (1974, J. Mol. Spectrosc. 51, 142) and Camy-Peyret &
  Flaud (1976, Mol. Phys. 32, 523) — values from memory.
* Band origins: Tennyson et al. (2001, J. Phys. Chem. Ref. Data 30, 735,
  table of vibrational band origins) — values from memory.
* Harmonic frequencies and anharmonic constants ω_i, x_ij (for states
  without a listed origin): Benedict, Gailar & Plyler (1956, J. Chem. Phys.
  24, 1139) — values from memory.
* Band strengths S_band(296 K) (cm molecule⁻¹, HITRAN-like band sums):
  values from memory of HITRAN band totals (Rothman et al. 2013, JQSRT 130,
  4; Gordon et al. 2022, JQSRT 277, 107949); the weak ones (≲1e-20) are
  uncertain by up to a factor ~2.  The band-system totals (1.4 µm 9.4e-19,
  1.9 µm 8.9e-19, 1.14 µm 7.9e-20, 0.94 µm 6.7e-20) agree with the
  ~20 cm⁻² atm⁻¹ (≈8e-19) quoted for the 1.38 and 1.87 µm systems and
  ~2 cm⁻² atm⁻¹ for the 1.14 / 0.94 µm systems in combustion-gas band-model
  handbooks (Ludwig et al. 1973, NASA SP-3080 — values from memory).
* Broadening: γ_H2 = 0.060 cm⁻¹ atm⁻¹, n_H2 = 0.50; γ_He = 0.025, n_He =
  0.40 at 296 K, J-independent (typical values of H₂O–H₂ / H₂O–He
  measurements, e.g. Steyert et al. 2004, J. Mol. Spectrosc. 228, 537 —
  values from memory).
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
from .asymmetric_top import WatsonConstants, honl_london, rotor_levels, rotor_levels_many

SPECIES = "H2O"
ABUNDANCE = 0.997317
T_REF = 296.0
DEBYE2_CGS = 1e-36  # (esu cm)² per D²
#: 8π³/(3hc) |R|² prefactor for |R|² in D² -> S in cm molecule⁻¹ per cm⁻¹ of ν
INTENSITY_PREFACTOR = 8.0 * np.pi ** 3 / (3.0 * H_CGS * C_CGS) * DEBYE2_CGS

# --- ground-state constants (see module docstring) ---
GROUND = dict(A=27.8806, B=14.5216, C=9.2777, DJ=1.2505e-3, DJK=-5.20e-3, DK=3.2505e-2,
              dJ=5.08e-4, dK=1.30e-3)
#: vibration–rotation constants α_i (X_v = X_0 - Σ α_i v_i); A gets +GAMMA_A22 v2(v2-1)
ALPHA = {"A": (0.7563, -3.2477, 1.2308), "B": (0.2156, -0.1659, 0.0940), "C": (0.1764, 0.1486, 0.1351)}
GAMMA_A22 = 0.60
#: Benedict et al. (1956): ω1, ω2, ω3 and x_ij
OMEGA = (3832.17, 1648.47, 3942.53)
XIJ = {(0, 0): -42.576, (1, 1): -16.813, (2, 2): -47.566, (0, 1): -15.933, (0, 2): -165.824,
       (1, 2): -20.332}
#: measured vibrational term values (Tennyson et al. 2001)
ORIGINS = {
    (0, 0, 0): 0.0, (0, 1, 0): 1594.746, (0, 2, 0): 3151.630, (1, 0, 0): 3657.053,
    (0, 0, 1): 3755.929, (0, 3, 0): 4666.793, (1, 1, 0): 5234.977, (0, 1, 1): 5331.267,
    (0, 4, 0): 6134.015, (1, 2, 0): 6775.093, (0, 2, 1): 6871.520, (2, 0, 0): 7201.540,
    (1, 0, 1): 7249.819, (0, 0, 2): 7445.045, (0, 5, 0): 7542.437, (1, 3, 0): 8273.976,
    (0, 3, 1): 8373.851, (2, 1, 0): 8761.582, (1, 1, 1): 8806.999, (0, 1, 2): 9000.136,
    (2, 2, 0): 10284.367, (1, 2, 1): 10328.731, (3, 0, 0): 10599.686, (2, 0, 1): 10613.354,
    (1, 0, 2): 10868.876, (0, 0, 3): 11032.406, (3, 1, 0): 12139.315, (2, 1, 1): 12151.254,
    (1, 1, 2): 12407.662, (0, 1, 3): 12565.007,
}
#: cold-band integrated strengths at 296 K, cm/molecule (values from memory, see docstring)
BAND_STRENGTH_296 = {
    (0, 1, 0): 1.05e-17,   # ν2, 6.3 µm
    (0, 2, 0): 7.6e-20,    # 2ν2, 3.2 µm
    (1, 0, 0): 4.8e-19,    # ν1, 2.7 µm
    (0, 0, 1): 7.0e-18,    # ν3, 2.7 µm
    (0, 3, 0): 6.0e-22,    # 3ν2, 2.1 µm
    (1, 1, 0): 4.6e-20,    # ν1+ν2, 1.9 µm
    (0, 1, 1): 8.4e-19,    # ν2+ν3, 1.9 µm
    (1, 2, 0): 2.8e-21,    # 1.5 µm
    (0, 2, 1): 6.3e-20,    # 2ν2+ν3, 1.45 µm
    (2, 0, 0): 5.6e-20,    # 2ν1, 1.39 µm
    (1, 0, 1): 7.8e-19,    # ν1+ν3, 1.38 µm
    (0, 0, 2): 4.2e-20,    # 2ν3, 1.34 µm
    (1, 3, 0): 1.0e-22,    # 1.2 µm
    (0, 3, 1): 6.0e-21,    # 1.19 µm
    (2, 1, 0): 3.0e-21,    # 1.14 µm
    (1, 1, 1): 6.5e-20,    # ν1+ν2+ν3, 1.13 µm
    (0, 1, 2): 5.0e-21,    # 1.11 µm
    (1, 2, 1): 3.5e-21,    # 0.97 µm
    (3, 0, 0): 4.5e-21,    # 0.94 µm
    (2, 0, 1): 5.1e-20,    # 2ν1+ν3, 0.94 µm
    (1, 0, 2): 3.0e-21,    # 0.92 µm
    (0, 0, 3): 5.0e-21,    # 3ν3, 0.91 µm
    (2, 1, 1): 5.0e-21,    # 0.82 µm
    (1, 1, 2): 4.0e-22,    # 0.81 µm
}
#: lower states of hot bands
HOT_LOWER = ((0, 1, 0), (0, 2, 0), (1, 0, 0), (0, 0, 1), (0, 3, 0), (1, 1, 0), (0, 1, 1), (0, 4, 0), (1, 2, 0),
             (0, 2, 1), (2, 0, 0), (1, 0, 1), (0, 0, 2))
#: broadening by H2 and He (see docstring)
BROADENING = {"gamma_h2": 0.060, "n_h2": 0.50, "gamma_he": 0.025, "n_he": 0.40}

J_MAX_PARTITION = 50
E_VIB_MAX_PARTITION = 20000.0


def term_value(v) -> float:
    """Vibrational term value G(v) above the zero-point level, cm⁻¹ (measured if listed)."""
    v = tuple(int(x) for x in v)
    if v in ORIGINS:
        return ORIGINS[v]
    g = sum(w * n for w, n in zip(OMEGA, v))
    for (i, j), x in XIJ.items():
        g += x * (v[i] * v[j] + 0.5 * (v[i] + v[j]))
    return g


def state_constants(v) -> WatsonConstants:
    """A-reduced constants of vibrational state v = (v1, v2, v3) (α approximation, see docstring)."""
    v1, v2, v3 = v
    rot = {}
    for name in ("A", "B", "C"):
        a1, a2, a3 = ALPHA[name]
        rot[name] = GROUND[name] - a1 * v1 - a2 * v2 - a3 * v3
    rot["A"] += GAMMA_A22 * v2 * (v2 - 1)
    aeff0 = GROUND["A"] - 0.5 * (GROUND["B"] + GROUND["C"])
    aeff = rot["A"] - 0.5 * (rot["B"] + rot["C"])
    dk = GROUND["DK"] * (aeff / aeff0) ** 4
    return WatsonConstants(A=rot["A"], B=rot["B"], C=rot["C"], DJ=GROUND["DJ"], DJK=GROUND["DJK"],
                           DK=dk, dJ=GROUND["dJ"], dK=GROUND["dK"], pade=True)


@functools.lru_cache(maxsize=128)
def state_levels(v, j_max: int):
    """Rotational levels (with eigenvectors) of vibrational state ``v`` for J ≤ j_max."""
    return rotor_levels(state_constants(v), j_max, with_vectors=True)


def spin_weight(v, ka, kc) -> np.ndarray:
    """Nuclear-spin weight: 3 (ortho) for Ka + Kc + v3 odd, else 1 (para)."""
    return np.where((np.asarray(ka) + np.asarray(kc) + v[2]) % 2 == 1, 3.0, 1.0)


# ---------------------------------------------------------------- partition function
def _partition_states():
    """Vibrational states included in Q: all with G(v) < E_VIB_MAX_PARTITION."""
    states = []
    for v in itertools.product(range(7), range(13), range(7)):
        if term_value(v) < E_VIB_MAX_PARTITION:
            states.append(v)
    return states


@functools.lru_cache(maxsize=1)
def _partition_levels():
    """Energies (cm⁻¹) and total degeneracies g_ns (2J+1) of all levels in Q."""
    states = _partition_states()
    # rotational constants via α's are unreliable far up the bending ladder: cap v2 at 3
    keys = sorted({(min(v[0], 2), min(v[1], 3), min(v[2], 2)) for v in states})
    levels = rotor_levels_many([state_constants(k) for k in keys], J_MAX_PARTITION, with_vectors=False)
    rot = {k: lev.flat() for k, lev in zip(keys, levels)}
    energies, degs = [], []
    for v in states:
        j, ka, kc, e = rot[(min(v[0], 2), min(v[1], 3), min(v[2], 2))]
        energies.append(term_value(v) + e)
        degs.append((2 * j + 1) * spin_weight(v, ka, kc))
    return np.concatenate(energies), np.concatenate(degs)


@functools.lru_cache(maxsize=4096)
def _partition_scalar(t: float) -> float:
    e, g = _partition_levels()
    return float(np.sum(g * np.exp(-C2_CM_K * e / t)))


def partition_function(temperature_K):
    """Total internal partition function Q(T) of H₂¹⁶O (HITRAN spin convention), vectorised in T.

    Direct sum over vibrational states below 20000 cm⁻¹ and J ≤ 50 of each
    (rotational levels of states with v1 > 2, v2 > 3 or v3 > 2 are those of the
    nearest state with constants).  At 3000 K levels above ~25000 cm⁻¹ carry
    < 1e-5 of the population, so the truncation error is small against the
    model error of the effective Hamiltonian at high J.
    """
    t = np.asarray(temperature_K, dtype=np.float64)
    q = np.array([_partition_scalar(float(ti)) for ti in np.atleast_1d(t).ravel()])
    return float(q[0]) if t.ndim == 0 else q.reshape(t.shape)


def vibrational_partition(temperature_K: float) -> float:
    """Σ_v exp(-c2 G_v/T) over the states of :func:`partition_function` (no degeneracy)."""
    g = np.array([term_value(v) for v in _partition_states()])
    return float(np.sum(np.exp(-C2_CM_K * g / float(temperature_K))))


register_partition_function(SPECIES, partition_function)


# ---------------------------------------------------------------- bands
def band_type(lower, upper) -> str:
    """'b' for A1 <- A1 (Δv3 even), 'a' for B2 <-> A1 (Δv3 odd)."""
    return "a" if (upper[2] - lower[2]) % 2 else "b"


def transition_moment_sq(delta) -> float:
    """|R|² (D²) of the cold band 0 -> delta from its literature band strength."""
    nu0 = term_value(delta)
    s = BAND_STRENGTH_296[tuple(delta)]
    stim = -math.expm1(-C2_CM_K * nu0 / T_REF)
    return s * vibrational_partition(T_REF) / (INTENSITY_PREFACTOR * nu0 * stim)


def band_list():
    """All bands as (lower, upper, |R|² in D²): cold bands and their harmonic-scaled hot bands."""
    bands = []
    for delta in BAND_STRENGTH_296:
        r2 = transition_moment_sq(delta)
        bands.append(((0, 0, 0), tuple(delta), r2))
        for low in HOT_LOWER:
            up = tuple(a + d for a, d in zip(low, delta))
            if up not in ORIGINS:
                continue
            factor = math.prod(math.comb(a + d, d) for a, d in zip(low, delta))
            bands.append((low, up, r2 * factor))
    return bands


def band_transitions(lower, upper, max_j: int) -> dict:
    """All allowed rotational transitions of one band with J'' ≤ max_j.

    Returns a dict of arrays: ``j_lo, ka_lo, kc_lo, j_up, ka_up, kc_up``,
    ``nu`` (cm⁻¹), ``e_lower`` (cm⁻¹, incl. G(v'')), ``hl`` (Hönl–London
    factor) and ``g_ns`` (nuclear-spin weight of the lower level).
    """
    lo = state_levels(tuple(lower), max_j + 1)
    up = state_levels(tuple(upper), max_j + 1)
    g_lo, g_up = term_value(lower), term_value(upper)
    btype = band_type(lower, upper)
    parts = []
    for j in range(max_j + 1):
        for jp in (j - 1, j, j + 1):
            if jp < 0:
                continue
            hl = honl_london(lo.vectors[j], up.vectors[jp], j, jp, btype)
            iu, il = np.nonzero(hl > 1e-10)
            parts.append(dict(
                j_lo=np.full(il.size, j), ka_lo=lo.ka[j][il], kc_lo=lo.kc[j][il],
                j_up=np.full(iu.size, jp), ka_up=up.ka[jp][iu], kc_up=up.kc[jp][iu],
                nu=g_up + up.energy[jp][iu] - g_lo - lo.energy[j][il],
                e_lower=g_lo + lo.energy[j][il], hl=hl[iu, il],
                g_ns=spin_weight(lower, lo.ka[j][il], lo.kc[j][il])))
    out = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    keep = out["nu"] > 0
    return {k: v[keep] for k, v in out.items()}


def band_lines(lower, upper, r2: float, max_j: int):
    """Lines of one vibrational band: (ν, E'', S(296 K)) arrays, J'' ≤ max_j."""
    tr = band_transitions(lower, upper, max_j)
    nu, el = tr["nu"], tr["e_lower"]
    q_ref = partition_function(T_REF)
    s = (INTENSITY_PREFACTOR * nu * r2 * tr["g_ns"] * tr["hl"] * np.exp(-C2_CM_K * el / T_REF)
         * -np.expm1(-C2_CM_K * nu / T_REF) / q_ref) * ABUNDANCE
    return nu, el, s


def line_list(max_j: int = 32, wn_min: float = 1000.0, wn_max: float = 14000.0,
              min_strength: float = 3e-26, check_temperatures=(296.0, 1000.0, 3000.0),
              hot_bands: bool = True) -> LineList:
    """H₂¹⁶O line list.

    Parameters
    ----------
    max_j : int
        Highest lower-state J.
    wn_min, wn_max : float
        Wavenumber window, cm⁻¹.
    min_strength : float
        Keep a line if its strength exceeds this (cm molecule⁻¹) at any of
        ``check_temperatures``.  The default 3e-26 keeps ~6.0e5 lines and
        drops 0.02% of the total strength at 3000 K, at most 3% in the
        weakest windows between band systems (9300–10000 cm⁻¹).
    hot_bands : bool
        Include bands from excited lower states.

    Returns
    -------
    LineList
        Strengths at 296 K (HITRAN form) with :func:`partition_function`.
    """
    return assemble_line_list((band_lines(lower, upper, r2, max_j) for lower, upper, r2 in band_list()
                               if hot_bands or not any(lower)), species=SPECIES, isotopologue="1H2-16O",
                              abundance=ABUNDANCE, t_ref=T_REF, partition=partition_function,
                              broadening=BROADENING, wn_min=wn_min, wn_max=wn_max,
                              min_strength=min_strength, check_temperatures=check_temperatures)
