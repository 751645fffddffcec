"""Spherical-top (XY4, point group T_d) rotational structure for F2 vibrational bands.

Levels
------
Ground-state rotational energies E(J) = B J(J+1) - D J²(J+1)² (tetrahedral
splittings neglected: they are < 1 cm⁻¹ for J ≲ 20 and irrelevant at the
resolving powers of the bundled tables).  An F2 vibrational level with
first-order Coriolis coupling ζ has sublevels J = R+1, R, R-1 (F⁺, F⁰, F⁻)
with Coriolis energies -2Bζ(J+1), -2Bζ, +2BζJ (from -2Bζ J·l with l = 1;
Herzberg 1945, *Infrared and Raman Spectra*, sec. IV.2(d); Jahn's rule
ΔR = 0 selects F⁺, F⁰, F⁻ for R, Q, P lines).

Spin statistics
---------------
The rotational level J splits into the species A1, A2, E, F1, F2 of the
rotational subgroup O; the number n_Γ(J) of each follows from the characters
of D^(J) (χ(θ) = sin((2J+1)θ/2)/sin(θ/2)) and the character table of O.
Nuclear-spin weights of ¹²CH₄ (HITRAN convention, g = g_ns (2J+1)): A 5,
E 2, F 3 (Herzberg 1945, table 10; Wilson 1935, J. Chem. Phys. 3, 276 —
value from memory), so the total weight of a J manifold is
(2J+1) W(J) with W(J) = Σ_Γ n_Γ(J) g_ns(Γ) → (4/3)(2J+1) at large J.

Line strengths
--------------
For an F2 ← A1 band with ΔR = 0 the fraction of a J'' manifold's strength
going to J' is (2J'+1) / (3(2J''+1)) (vector coupling of l = 1 with R = J'';
the three fractions sum to one), so the M- and spin-summed rotational
factor is W(J'') (2J'+1)/3.  An optional Herman–Wallis factor (1 + a m)²
with m = J''+1 (R), -J'' (P), 0 (Q) describes the P/R intensity asymmetry.
"""
from __future__ import annotations

import functools

import numpy as np

#: nuclear-spin weights of 12CH4 by rotational species (HITRAN convention)
SPIN_WEIGHTS = {"A1": 5, "A2": 5, "E": 2, "F1": 3, "F2": 3}

# character table of O: classes E, 8C3, 3C2, 6C4, 6C2' (rotation angles 0, 2π/3, π, π/2, π)
_CLASS_SIZE = np.array([1, 8, 3, 6, 6])
_CLASS_ANGLE = np.array([0.0, 2 * np.pi / 3, np.pi, np.pi / 2, np.pi])
_CHARACTERS = {"A1": (1, 1, 1, 1, 1), "A2": (1, 1, 1, -1, -1), "E": (2, -1, 2, 0, 0),
               "F1": (3, 0, -1, 1, -1), "F2": (3, 0, -1, -1, 1)}


def _chi_j(j: int) -> np.ndarray:
    """Characters of D^(J) on the classes of O."""
    out = np.empty(5)
    for i, th in enumerate(_CLASS_ANGLE):
        out[i] = 2 * j + 1 if th == 0 else np.sin((2 * j + 1) * th / 2) / np.sin(th / 2)
    return out


@functools.lru_cache(maxsize=512)
def species_counts(j: int) -> dict:
    """Number of rotational sublevels of each O species in the J manifold."""
    chi = _chi_j(j)
    return {g: int(round(float(np.sum(_CLASS_SIZE * np.array(c) * chi)) / 24.0))
            for g, c in _CHARACTERS.items()}


def spin_weight_sum(j) -> np.ndarray:
    """W(J) = Σ_Γ n_Γ(J) g_ns(Γ) (vectorised over integer J)."""
    j = np.atleast_1d(np.asarray(j, dtype=int))
    w = np.array([sum(n * SPIN_WEIGHTS[g] for g, n in species_counts(int(x)).items()) for x in j], float)
    return w


def rotational_energy(j, b: float, d: float) -> np.ndarray:
    """E(J) = B J(J+1) - D J²(J+1)², cm⁻¹."""
    x = np.asarray(j, dtype=np.float64)
    x = x * (x + 1.0)
    return b * x - d * x ** 2


def f2_band(j_max: int, nu0: float, b_lo: float, d_lo: float, b_up: float, d_up: float,
            zeta: float, hw: float = 0.0) -> dict:
    """P, Q, R lines of an F2 ← (A1-like) band for J'' = 0..j_max.

    Returns a dict of arrays: ``j_lo``, ``dj`` (-1, 0, +1), ``nu`` (cm⁻¹),
    ``e_rot_lo`` (cm⁻¹) and ``factor`` = W(J'') (2J'+1)/3 × (1 + hw m)².
    """
    jl = np.arange(j_max + 1)
    parts = {k: [] for k in ("j_lo", "dj", "nu", "e_rot_lo", "factor")}
    w = spin_weight_sum(jl)
    e_lo = rotational_energy(jl, b_lo, d_lo)
    for dj in (-1, 0, 1):
        ok = jl + dj >= 0
        if dj == 0:
            ok &= jl > 0
        j, ju = jl[ok], jl[ok] + dj
        coriolis = {1: -2 * b_up * zeta * (ju + 1), 0: -2 * b_up * zeta * np.ones_like(ju, float),
                    -1: 2 * b_up * zeta * ju}[dj]
        nu = nu0 + rotational_energy(ju, b_up, d_up) + coriolis - e_lo[ok]
        m = {1: j + 1.0, 0: np.zeros_like(j, float), -1: -j.astype(float)}[dj]
        parts["j_lo"].append(j)
        parts["dj"].append(np.full(j.size, dj))
        parts["nu"].append(nu)
        parts["e_rot_lo"].append(e_lo[ok])
        parts["factor"].append(w[ok] * (2 * ju + 1) / 3.0 * (1.0 + hw * m) ** 2)
    return {k: np.concatenate(v) for k, v in parts.items()}
