"""Carbon dioxide (¹²C¹⁶O₂) line list from a linear-molecule band model.

Method
------
* Vibrational levels (v1, v2, ℓ, v3): anharmonic expansion
  G = Σ ω_i (v_i + d_i/2) + Σ x_ij (v_i + d_i/2)(v_j + d_j/2) + g22 ℓ²
  (Herzberg 1945, Infrared and Raman Spectra, eq. II.281), Fermi resonance
  not diagonalised.  These levels give the vibrational part of Q(T) and the
  anharmonic shifts of hot bands.
* Cold bands: the observed band origins of the Δv3 = 1 and 3 bands in
  0.8–5 µm (HITRAN labels v1 v2 ℓ v3 r, Fermi-resonance rank r) with their
  296 K band strengths (table :data:`COLD_BANDS`).  All are parallel
  (Δℓ = 0).  Fermi polyad members keep their observed origins and strengths.
* Hot bands: the same vibrational change applied to every lower state with
  G < :data:`HOT_LOWER_MAX_CM` (5000 cm⁻¹; 9000 cm⁻¹ for ν3 and 7000 cm⁻¹
  for the 2.7 µm dyad, :data:`HOT_LOWER_MAX_BY_BAND`), J'' ≤ 160; the
  lower levels kept hold 91 % (5000 cm⁻¹) to 99 % (9000 cm⁻¹) of the
  molecules at 1500 K and 46–80 % at 3000 K, so the weak overtone bands are
  too weak by up to 2× at the hot end of the grid.  The origin is the cold origin plus the
  anharmonic-expansion difference, the squared transition moment is the
  cold one times the harmonic-oscillator factor Π_i C(v_i + Δv_i, Δv_i)
  (for the bend at fixed ℓ: ((v2+2)² - ℓ²)/4 per two quanta).  A documented
  simplification: Fermi mixing of hot-band levels is ignored.
* Rotational structure: E = B_v [J(J+1) - ℓ²] - D [J(J+1) - ℓ²]², B_v = B_000
  - Σ α_i v_i.  P/R branches with Hönl–London factors J''+1 and J'' (Σ–Σ),
  and P/Q/R for Π–Π etc. with ((J''+1)² - ℓ²)/(J''+1), (J''² - ℓ²)/J'',
  ℓ²(2J''+1)/(J''(J''+1)) (Herzberg 1945, sec. IV.1).  Nuclear-spin
  statistics of ¹⁶O (I = 0): Σg⁺ states (v3 even, ℓ = 0) have even J only,
  Σu⁺ states (v3 odd) odd J only, states with ℓ > 0 one of the e/f pair per J.
* Line strength per line: S = (8π³ ν / 3hc) |R|² L_J exp(-c2 E''/T)
  (1 - exp(-c2 ν/T)) / Q(T), |R|² of each cold band set so that its lines sum
  to the catalogued 296 K band strength.
* Q(T): direct sum over the same vibrational levels (G < 30000 cm⁻¹) and
  rotational levels with the spin statistics above.

Sources of constants (all values from memory)
---------------------------------------------
ω_i, x_ij, g22: Chedin (1979, J. Mol. Spectrosc. 76, 430) / Herzberg (1945).
B_000 = 0.39022 cm⁻¹, α_i, D = 1.33e-7 cm⁻¹: Herzberg (1945) table 68 and
Rothman & Young (1981, JQSRT 25, 505).  Band origins: Rothman & Young (1981)
and the HITRAN band list (Rothman et al. 1992, JQSRT 48, 537).  Band strengths:
HITRAN-era band intensity compilations (Rothman et al. 1992; for the 2.0 and
1.6 µm bands Toth et al. 2008, J. Mol. Spectrosc. 251, 64); uncertainties of
the recalled values are ~20–50 % for the weak overtone bands.  Broadening:
γ_H2 = 0.11, n = 0.64; γ_He = 0.06, n = 0.50 (cm⁻¹ atm⁻¹ at 296 K; values
from memory).  Abundance of ¹²C¹⁶O₂: 0.98420 (HITRAN).
"""
from __future__ import annotations

import functools
import itertools

import numpy as np

from ...constants import C2_CM_K, C_CGS, H_CGS

OMEGA = (1354.31, 672.85, 2396.32)
DEGEN = (1, 2, 1)
X = {(0, 0): -2.93, (0, 1): -4.61, (0, 2): -19.82, (1, 1): 1.35, (1, 2): -12.31, (2, 2): -12.47}
G22 = -0.97
B000 = 0.39022
ALPHA = (0.00112, -0.00072, 0.00309)
D_CENT = 1.33e-7
ABUNDANCE = 0.98420
MASS_AMU = 43.98983
BROADENING = {"gamma_h2": 0.11, "n_h2": 0.64, "gamma_he": 0.06, "n_he": 0.50}
T_REF = 296.0

#: (HITRAN upper label, unperturbed change (dv1, dv2, dv3), origin cm⁻¹, S_band(296) cm molecule⁻¹).
#: Origins and strengths: see module docstring (values from memory).
COLD_BANDS = (
    ("00011", (0, 0, 1), 2349.143, 9.6e-17),
    ("10012", (0, 2, 1), 3612.842, 1.05e-18),
    ("10011", (1, 0, 1), 3714.782, 1.55e-18),
    ("20013", (0, 4, 1), 4853.623, 1.2e-21),
    ("20012", (1, 2, 1), 4977.834, 1.25e-20),
    ("20011", (2, 0, 1), 5099.660, 4.9e-21),
    ("30014", (0, 6, 1), 6075.983, 1.4e-23),
    ("30013", (1, 4, 1), 6227.917, 1.6e-22),
    ("30012", (2, 2, 1), 6347.851, 5.0e-22),
    ("30011", (3, 0, 1), 6503.081, 5.0e-23),
    ("00031", (0, 0, 3), 6972.577, 1.2e-21),
)

HOT_LOWER_MAX_CM = 5000.0
#: Wider hot-band lower-level ranges for the strong bands: levels below 9000 (7000) cm^-1 hold 80 %
#: (62 %) of the molecules at 3000 K, those below 5000 cm^-1 only 46 %.
HOT_LOWER_MAX_BY_BAND = {"00011": 9000.0, "10011": 7000.0, "10012": 7000.0}
J_MAX = 160


def vib_energy(v1, v2, l, v3):
    """Anharmonic vibrational term value (cm⁻¹) above the potential minimum."""
    q = [np.asarray(v1, float) + 0.5, np.asarray(v2, float) + 1.0, np.asarray(v3, float) + 0.5]
    g = sum(OMEGA[i] * q[i] for i in range(3))
    for (i, j), x in X.items():
        g = g + x * q[i] * q[j]
    return g + G22 * np.asarray(l, float) ** 2


def rot_constant(v1, v2, v3):
    """B_v (cm⁻¹) = B_000 - Σ α_i v_i."""
    return B000 - ALPHA[0] * np.asarray(v1) - ALPHA[1] * np.asarray(v2) - ALPHA[2] * np.asarray(v3)


@functools.lru_cache(maxsize=1)
def vibrational_states(e_max: float = 30000.0):
    """All (v1, v2, ℓ, v3) with G - G_000 < e_max: structured array columns as a dict."""
    g0 = float(vib_energy(0, 0, 0, 0))
    rows = []
    for v1, v2, v3 in itertools.product(range(25), range(50), range(13)):
        for l in range(v2 % 2, v2 + 1, 2):
            e = float(vib_energy(v1, v2, l, v3)) - g0
            if e < e_max:
                rows.append((v1, v2, l, v3, e))
    arr = np.array(rows)
    order = np.lexsort((arr[:, 2], arr[:, 3], arr[:, 1], arr[:, 0], arr[:, 4]))
    arr = arr[order]
    return {"v1": arr[:, 0].astype(int), "v2": arr[:, 1].astype(int), "l": arr[:, 2].astype(int),
            "v3": arr[:, 3].astype(int), "energy": arr[:, 4]}


def allowed_j(l: int, v3: int, j: np.ndarray) -> np.ndarray:
    """Mask of rotational levels with non-zero ¹⁶O nuclear-spin weight (see docstring)."""
    if l == 0:
        return (j % 2) == (v3 % 2)
    return j >= l


def rot_energy(b, l, j):
    x = j * (j + 1.0) - l * l
    return b * x - D_CENT * x * x


def partition_function(temperature):
    """Q(T) by direct summation over the level structure of this module."""
    t = np.atleast_1d(np.asarray(temperature, dtype=np.float64))
    st = vibrational_states()
    j = np.arange(0, 301)
    parity = np.where(st["l"] == 0, st["v3"] % 2, -1)   # spin statistics depend on v3 only for ℓ = 0
    q = np.zeros(t.size)
    for l, p in sorted(set(zip(st["l"].tolist(), parity.tolist()))):
        sel = (st["l"] == l) & (parity == p)
        jj = j[allowed_j(l, max(p, 0), j)]
        b = rot_constant(st["v1"][sel], st["v2"][sel], st["v3"][sel])
        e = st["energy"][sel][:, None] + rot_energy(b[:, None], l, jj[None, :])
        w = np.broadcast_to((2 * jj + 1.0)[None, :], e.shape)
        q += np.array([np.sum(w * np.exp(-C2_CM_K * e / ti)) for ti in t])
    return q if np.ndim(temperature) else float(q[0])


def _harmonic_factor(lower, delta):
    """|R_hot|²/|R_cold|² for the change ``delta`` from ``lower`` (harmonic oscillator).

    Ratio of the squared harmonic matrix elements from ``lower`` and from the
    ground state, so that it is 1 for the cold band itself.
    """
    return _harmonic_sq(lower, delta) / _harmonic_sq((0, 0, 0, 0), delta)


def _harmonic_sq(lower, delta):
    """Squared harmonic matrix element of the change ``delta`` from ``lower``, up to a constant."""
    v1, v2, l, v3 = lower
    d1, d2, d3 = delta
    from math import comb
    f = comb(v1 + d1, d1) * comb(v3 + d3, d3)
    n = v2
    for _ in range(d2 // 2):
        f *= ((n + 2) ** 2 - l ** 2) / 4.0
        n += 2
    return float(f)


def _band_lines(l: int, v3_lower: int, b_lo: float, b_up: float, e_vib_lo: float, nu0: float, j_max: int):
    """Positions, E'', Hönl–London factors, J'' of one parallel band (ΔJ = -1, 0, +1)."""
    j = np.arange(0, j_max + 1)
    jl = j[allowed_j(l, v3_lower, j)]
    parts = []
    for dj in (-1, 0, 1):
        if dj == 0 and l == 0:
            continue
        ju = jl + dj
        ok = ju >= max(l, 0)
        if l == 0:
            ok &= ju >= 0
        jlo, jup = jl[ok], ju[ok]
        if dj == 1:
            hl = ((jlo + 1.0) ** 2 - l * l) / (jlo + 1.0)
        elif dj == -1:
            hl = (jlo ** 2 - l * l) / np.maximum(jlo, 1)
        else:
            hl = l * l * (2 * jlo + 1.0) / np.maximum(jlo * (jlo + 1.0), 1)
        keep = hl > 0
        e_lo = e_vib_lo + rot_energy(b_lo, l, jlo[keep])
        nu = nu0 + rot_energy(b_up, l, jup[keep]) - rot_energy(b_lo, l, jlo[keep])
        parts.append((nu, e_lo, hl[keep], jlo[keep]))
    return [np.concatenate(x) for x in zip(*parts)]


def _unit_strength(nu, e_lo, hl, q296):
    """Line strengths at 296 K for |R|² = 1 (cgs)."""
    return (8.0 * np.pi ** 3 * nu / (3.0 * H_CGS * C_CGS) * hl * np.exp(-C2_CM_K * e_lo / T_REF)
            * -np.expm1(-C2_CM_K * nu / T_REF) / q296)


def line_arrays(j_max: int = J_MAX, hot_lower_max: float = HOT_LOWER_MAX_CM) -> dict:
    """All lines (cold and hot bands), abundance-weighted S(296), sorted by wavenumber."""
    st = vibrational_states()
    q296 = partition_function(T_REF)
    # "band" = 100000 * cold-band index + lower-level index (0 = ground: the cold band itself)
    out = {k: [] for k in ("wavenumber_cm", "e_lower_cm", "strength_296", "band")}
    for ib, (label, delta, nu_cold, s_band) in enumerate(COLD_BANDS):
        low = np.nonzero(st["energy"] < max(hot_lower_max, HOT_LOWER_MAX_BY_BAND.get(label, 0.0)))[0]
        # |R|^2 of the cold band from its catalogued strength
        nu, e_lo, hl, _ = _band_lines(0, 0, B000, float(rot_constant(*(delta[0], delta[1], delta[2]))), 0.0,
                                      nu_cold, j_max)
        r2 = s_band / (ABUNDANCE * _unit_strength(nu, e_lo, hl, q296).sum())
        g_cold = float(vib_energy(*delta[:2], 0, delta[2]) - vib_energy(0, 0, 0, 0))
        for k in low:
            v1, v2, l, v3 = (int(st[c][k]) for c in ("v1", "v2", "l", "v3"))
            up = (v1 + delta[0], v2 + delta[1], v3 + delta[2])
            shift = float(vib_energy(up[0], up[1], l, up[2]) - vib_energy(v1, v2, l, v3)) - g_cold
            factor = _harmonic_factor((v1, v2, l, v3), delta)
            b_lo = float(rot_constant(v1, v2, v3))
            b_up = float(rot_constant(*up))
            nu, e_lo, hl, _ = _band_lines(l, v3, b_lo, b_up, float(st["energy"][k]), nu_cold + shift, j_max)
            s = ABUNDANCE * factor * r2 * _unit_strength(nu, e_lo, hl, q296)
            out["wavenumber_cm"].append(nu)
            out["e_lower_cm"].append(e_lo)
            out["strength_296"].append(s)
            out["band"].append(np.full(nu.size, ib * 100000 + k))
    res = {k: np.concatenate(v) for k, v in out.items()}
    order = np.lexsort((res["e_lower_cm"], res["wavenumber_cm"]))
    return {k: v[order] for k, v in res.items()}


def line_list(j_max: int = J_MAX, hot_lower_max: float = HOT_LOWER_MAX_CM, min_strength: float = 1e-30):
    """CO2 lines as one :class:`~retrieve.opacity_build.linelist.LineList` (HITRAN-form strengths).

    Lines whose strength stays below ``min_strength`` (cm molecule⁻¹) at 296,
    1000 and 3000 K are dropped: spread over an R = 1000 bin they add < 1e-30
    cm² to the cross section.
    """
    from ..linelist import LineList

    d = line_arrays(j_max, hot_lower_max)
    q296 = partition_function(T_REF)
    s_max = d["strength_296"].copy()
    for t in (1000.0, 3000.0):
        scale = (q296 / partition_function(t)) * np.exp(-C2_CM_K * d["e_lower_cm"] * (1.0 / t - 1.0 / T_REF))
        stim = -np.expm1(-C2_CM_K * d["wavenumber_cm"] / t) / -np.expm1(-C2_CM_K * d["wavenumber_cm"] / T_REF)
        s_max = np.maximum(s_max, d["strength_296"] * scale * stim)
    keep = s_max > min_strength
    n = int(keep.sum())
    return LineList(species="CO2", wavenumber_cm=d["wavenumber_cm"][keep], e_lower_cm=d["e_lower_cm"][keep],
                    mass_amu=MASS_AMU, partition=partition_function, strength_ref=d["strength_296"][keep],
                    t_ref=T_REF, partition_ref=partition_function(T_REF), isotopologue_abundance=ABUNDANCE,
                    abundance_weighted=True,
                    gamma_h2=np.full(n, BROADENING["gamma_h2"]), n_h2=np.full(n, BROADENING["n_h2"]),
                    gamma_he=np.full(n, BROADENING["gamma_he"]), n_he=np.full(n, BROADENING["n_he"]),
                    isotopologue="12C16O2")
