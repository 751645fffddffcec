"""Carbon monoxide line list from Dunham constants and a dipole-moment function.

Method
------
* Energies: Dunham expansion (:func:`.diatomic.dunham_energy`) with the
  ¹²C¹⁶O coefficients below; other isotopologues by first-order mass scaling.
* Intensities: a cubic dipole-moment function μ(r) = Σ μ_k (r - r_e)^k whose
  four coefficients reproduce the permanent dipole <0|μ|0> and the rotationless
  band moments |M_10|, |M_20|, |M_30| (literature values below) with numerical
  RKR/DVR wavefunctions.  Matrix elements <v'J'|μ|v''J''> for every line then
  give the Herman–Wallis factors and the hot-band moments as predictions.
  Of the sign choices for M_20 and M_30 the one with the smallest electrical
  anharmonicity (μ_2² + μ_3² r_e²) is taken (a smooth dipole function; common
  practice, no source).
* Einstein A = 64π⁴ ν³ |<μ>|² |m| / (3 h (2J'+1)) (Hönl–London factor |m| for
  1Σ–1Σ; Herzberg 1950).  Line strengths follow the HITRAN convention
  (Šimečková et al. 2006, JQSRT 98, 130, eq. 20), abundance-weighted.
* Partition function: direct sum over the same Dunham levels.

Sources of constants
--------------------
Dunham coefficients of ¹²C¹⁶O: Y10, Y20, Y30, Y01, Y11, Y02 as tabulated by
Huber & Herzberg (1979, Constants of Diatomic Molecules) and refined by
Guelachvili et al. (1983, J. Mol. Spectrosc. 98, 64) — values from memory.
Y40 and Y21 are small; values from memory.  Y12 (β_e) and Y03 (H_e) are
derived from the others with the standard Dunham/Kratzer relations (Herzberg
1950, eqs. III.139 and III.141), so they are not independent inputs.
Dipole: μ_00 = -0.10980 D (C⁻O⁺ polarity; Muenter 1975, J. Mol. Spectrosc. 55,
490 — value from memory); |M_10| = 0.1055 D, |M_20| = 6.5e-3 D, |M_30| =
4.6e-4 D (Chackerian & Tipping 1983, J. Mol. Spectrosc. 99, 431; values from
memory).  Isotopic abundances and masses: HITRAN isotopologue table (values
from memory).  Broadening by H2 and He: γ = 0.070 / 0.050 cm⁻¹ atm⁻¹ at 296 K,
n = 0.60 / 0.55, J-independent (values from memory, typical of Tan et al.
2022, ApJS 262, 40).
"""
from __future__ import annotations

import functools

import numpy as np

from ...constants import C2_CM_K, C_CGS, H_CGS
from .diatomic import (dunham_energy, honl_london_sigma, rkr_potential, rovibrational_wavefunctions,
                       scale_isotopologue)

DEBYE_CGS = 1e-18  # esu cm per debye (definition)

# --- 12C16O Dunham coefficients, cm^-1 (see module docstring for sources) ---
_Y10, _Y20, _Y30, _Y40 = 2169.81267, -13.28788, 1.0511e-2, 5.7e-5
_Y01, _Y11, _Y21 = 1.93128087, -1.750441e-2, 5.49e-7
_Y02 = -6.12147e-6


def _derived_y12_y03(y10, y20, y01, y11, y02):
    """β_e and H_e from the Kratzer/Pekeris-type relations (Herzberg 1950, III.139/141)."""
    we, wexe, be, ae, de = y10, -y20, y01, -y11, -y02
    beta_e = de * (8.0 * wexe / we - 5.0 * ae / be - ae ** 2 * we / (24.0 * be ** 3))
    h_e = 2.0 * de / (3.0 * we ** 2) * (12.0 * be ** 2 - ae * we)
    return -beta_e, h_e


_Y12, _Y03 = _derived_y12_y03(_Y10, _Y20, _Y01, _Y11, _Y02)

Y_12C16O = {(1, 0): _Y10, (2, 0): _Y20, (3, 0): _Y30, (4, 0): _Y40,
            (0, 1): _Y01, (1, 1): _Y11, (2, 1): _Y21,
            (0, 2): _Y02, (1, 2): _Y12, (0, 3): _Y03}

MU00_DEBYE = -0.10980
BAND_MOMENTS_DEBYE = {1: 0.1055, 2: 6.5e-3, 3: 4.6e-4}

# atomic masses (amu) and isotopologue data: (label, masses, abundance, nuclear-spin degeneracy)
_MASS = {"12C": 12.0, "13C": 13.00335484, "16O": 15.99491462, "18O": 17.99915961}
ISOTOPOLOGUES = (
    ("12C16O", ("12C", "16O"), 0.986544, 1),
    ("13C16O", ("13C", "16O"), 0.011084, 2),
    ("12C18O", ("12C", "18O"), 0.0019782, 1),
)

BROADENING = {"gamma_h2": 0.070, "n_h2": 0.60, "gamma_he": 0.050, "n_he": 0.55}

V_LOWER_MAX = 6     # hot bands from v'' ≤ 6
DELTA_V = (1, 2, 3)
J_MAX = 100
T_REF = 296.0


def reduced_mass(label: str) -> float:
    """Reduced mass (amu) of a CO isotopologue."""
    for name, atoms, _, _ in ISOTOPOLOGUES:
        if name == label:
            m1, m2 = (_MASS[a] for a in atoms)
            return m1 * m2 / (m1 + m2)
    raise KeyError(label)


def dunham_coefficients(label: str = "12C16O") -> dict:
    """Dunham Y_kl (cm^-1) of an isotopologue, mass-scaled from ¹²C¹⁶O."""
    rho = np.sqrt(reduced_mass("12C16O") / reduced_mass(label))
    return scale_isotopologue(Y_12C16O, rho)


def level_energies(label: str = "12C16O", v_max: int = 30, j_max: int = 200):
    """E(v, J) in cm^-1 above the (v=0, J=0) level, shape (v_max+1, j_max+1)."""
    y = dunham_coefficients(label)
    v = np.arange(v_max + 1)[:, None]
    j = np.arange(j_max + 1)[None, :]
    e = dunham_energy(y, v, j)
    return e - e[0, 0]


def partition_function(temperature, label: str = "12C16O"):
    """Total internal partition sum by direct summation over Dunham levels.

    Includes the nuclear-spin degeneracy in the HITRAN/TIPS convention
    (g = 1 for ¹²C¹⁶O, 2 for ¹³C¹⁶O).  Levels above the dissociation-scale
    cut-off (v ≤ 30, J ≤ 200, E < 60000 cm^-1) contribute < 1e-8 at 3000 K.
    """
    t = np.atleast_1d(np.asarray(temperature, dtype=np.float64))
    e = level_energies(label)
    g_spin = {name: g for name, _, _, g in ISOTOPOLOGUES}[label]
    j = np.arange(e.shape[1])
    keep = e < 60000.0
    ee = e[keep]
    gg = np.broadcast_to(2 * j + 1, e.shape)[keep]
    q = g_spin * np.sum(gg[None, :] * np.exp(-C2_CM_K * ee[None, :] / t[:, None]), axis=1)
    return q if np.ndim(temperature) else float(q[0])


@functools.lru_cache(maxsize=8)
def _wavefunctions(label: str):
    mu = reduced_mass(label)
    y = dunham_coefficients(label)
    potential, r_e = rkr_potential(y, mu)
    r_grid = np.linspace(0.82, 1.80, 180)  # sinc-DVR step 0.0055 Å: >10 points per wavelength at v = 9
    psi = rovibrational_wavefunctions(potential, mu, r_grid, J_MAX + 1, V_LOWER_MAX + max(DELTA_V) + 1)
    return r_grid, r_e, psi


def dipole_coefficients(label: str = "12C16O") -> np.ndarray:
    """μ_k (D Å^-k), k = 0..3, fitted to μ_00 and the band moments M_10, M_20, M_30.

    The fit uses rotationless (J = 0) wavefunctions of ¹²C¹⁶O; the dipole
    function is isotope-independent (Born–Oppenheimer), so other isotopologues
    reuse it.
    """
    r_grid, r_e, psi = _wavefunctions("12C16O")
    x = r_grid - r_e
    powers = np.stack([x ** k for k in range(4)])            # (4, n_r)
    rows = [psi[0, 0] * powers @ psi[0, v] for v in range(4)]  # <v|x^k|0>
    a = np.array(rows)                                         # (4 targets, 4 coeffs)
    best = None
    for s2 in (1.0, -1.0):
        for s3 in (1.0, -1.0):
            target = np.array([MU00_DEBYE, BAND_MOMENTS_DEBYE[1], s2 * BAND_MOMENTS_DEBYE[2],
                               s3 * BAND_MOMENTS_DEBYE[3]])
            coef = np.linalg.solve(a, target)
            cost = coef[2] ** 2 + (coef[3] * r_e) ** 2
            if best is None or cost < best[0]:
                best = (cost, coef)
    return best[1]


def transition_moments(label: str, v_lo: int, v_up: int, j_lo: np.ndarray, j_up: np.ndarray) -> np.ndarray:
    """|<v' J'|μ|v'' J''>| in debye for arrays of J'', J'."""
    r_grid, r_e, psi = _wavefunctions(label)
    mu_r = np.polynomial.polynomial.polyval(r_grid - r_e, dipole_coefficients())
    return np.abs(np.einsum("ir,r,ir->i", psi[j_up, v_up], mu_r, psi[j_lo, v_lo]))


def line_arrays(label: str = "12C16O", j_max: int = J_MAX, v_lower_max: int = V_LOWER_MAX) -> dict:
    """All P and R lines of one isotopologue, sorted by wavenumber.

    Returns a dict of arrays: ``wavenumber_cm``, ``e_lower_cm``, ``einstein_a``
    (s^-1), ``g_upper``, ``g_lower``, ``v_lower``, ``v_upper``, ``j_lower``,
    ``j_upper``, ``strength_296`` (cm molecule^-1, abundance-weighted, HITRAN
    convention) and the scalar ``abundance``.
    """
    e = level_energies(label, v_max=v_lower_max + max(DELTA_V), j_max=j_max + 1)
    g_spin = {name: g for name, _, _, g in ISOTOPOLOGUES}[label]
    abundance = {name: a for name, _, a, _ in ISOTOPOLOGUES}[label]
    cols = {k: [] for k in ("v_lower", "v_upper", "j_lower", "j_upper")}
    for v_lo in range(v_lower_max + 1):
        for dv in DELTA_V:
            j_r = np.arange(0, j_max + 1)       # R(J''): J' = J''+1
            j_p = np.arange(1, j_max + 1)       # P(J''): J' = J''-1
            jl = np.concatenate([j_p, j_r])
            ju = np.concatenate([j_p - 1, j_r + 1])
            cols["v_lower"].append(np.full(jl.size, v_lo))
            cols["v_upper"].append(np.full(jl.size, v_lo + dv))
            cols["j_lower"].append(jl)
            cols["j_upper"].append(ju)
    out = {k: np.concatenate(v) for k, v in cols.items()}
    vl, vu, jl, ju = out["v_lower"], out["v_upper"], out["j_lower"], out["j_upper"]
    nu = e[vu, ju] - e[vl, jl]
    m = np.where(ju > jl, jl + 1, -jl)
    moment = np.empty(nu.size)
    for v_lo in range(v_lower_max + 1):
        for dv in DELTA_V:
            sel = (vl == v_lo) & (vu == v_lo + dv)
            moment[sel] = transition_moments(label, v_lo, v_lo + dv, jl[sel], ju[sel])
    moment_cgs = moment * DEBYE_CGS
    g_up = g_spin * (2 * ju + 1.0)
    a_coef = 64.0 * np.pi ** 4 * nu ** 3 * moment_cgs ** 2 * honl_london_sigma(m) / (3.0 * H_CGS * (2 * ju + 1.0))
    e_lo = e[vl, jl]
    q_ref = partition_function(T_REF, label)
    strength = (abundance * a_coef * g_up / (8.0 * np.pi * C_CGS * nu ** 2)
                * np.exp(-C2_CM_K * e_lo / T_REF) * (1.0 - np.exp(-C2_CM_K * nu / T_REF)) / q_ref)
    order = np.lexsort((jl, vl, nu))
    out = {k: v[order] for k, v in out.items()}
    out.update(wavenumber_cm=nu[order], e_lower_cm=e_lo[order], einstein_a=a_coef[order],
               g_upper=g_up[order], g_lower=(g_spin * (2 * jl + 1.0))[order],
               strength_296=strength[order], abundance=abundance)
    return out


def isotopologue_partition(label: str):
    """Q(T) callable of one isotopologue (module-level function, picklable)."""
    return functools.partial(partition_function, label=label)


def line_list(isotopologues=("12C16O", "13C16O", "12C18O"), j_max: int = J_MAX,
              v_lower_max: int = V_LOWER_MAX):
    """CO lines as :class:`~retrieve.opacity_build.linelist.LineList` chunks, one per isotopologue.

    Strengths are abundance-weighted (HITRAN convention), so the chunks sum to
    the cross section per CO molecule of terrestrial isotopic composition.
    """
    from ..linelist import LineList

    chunks = []
    for label in isotopologues:
        d = line_arrays(label, j_max=j_max, v_lower_max=v_lower_max)
        m1, m2 = (_MASS[a] for a in dict((n, at) for n, at, _, _ in ISOTOPOLOGUES)[label])
        n = d["wavenumber_cm"].size
        chunks.append(LineList(
            species="CO", wavenumber_cm=d["wavenumber_cm"], e_lower_cm=d["e_lower_cm"],
            mass_amu=m1 + m2, partition=isotopologue_partition(label),
            strength_ref=d["strength_296"], t_ref=T_REF, partition_ref=partition_function(T_REF, label),
            einstein_a=d["einstein_a"], g_upper=d["g_upper"], isotopologue_abundance=d["abundance"],
            abundance_weighted=True,
            gamma_h2=np.full(n, BROADENING["gamma_h2"]), n_h2=np.full(n, BROADENING["n_h2"]),
            gamma_he=np.full(n, BROADENING["gamma_he"]), n_he=np.full(n, BROADENING["n_he"]),
            isotopologue=label))
    return chunks
