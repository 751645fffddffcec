"""Asymmetric-top rotational levels and line strengths (Watson A-reduced Hamiltonian).

Hamiltonian
-----------
Watson's A-reduced quartic Hamiltonian in the I^r representation
(a = z, b = x, c = y; Watson 1977, in *Vibrational Spectra and Structure*
vol. 6, ed. Durig, eq. 2.49; Gordy & Cook 1984, *Microwave Molecular
Spectra*, ch. 8)::

    H = A Jz² + B Jx² + C Jy² - Δ_J J⁴ - Δ_JK J² Jz² - Δ_K Jz⁴
        - 2 δ_J J² (Jx² - Jy²) - δ_K [Jz² (Jx² - Jy²) + (Jx² - Jy²) Jz²]

set up in the symmetric-top basis |J K>, K = -J..J, with the usual real
positive matrix elements of J±² and diagonalised per J after the Wang
transformation, one block per symmetry species of the four-group D2
(King, Hainer & Cross 1943, J. Chem. Phys. 11, 27).  Diagonalising each
block separately keeps near-degenerate Ka pairs from mixing numerically.

Optional resummation of the K series (``pade=True``): the diagonal K terms
``(A - B̄) K² - Δ_K K⁴`` are replaced by the [1/1] Padé form
``(A - B̄) K² / (1 + Δ_K K² / (A - B̄))``.  It agrees with the Watson series
through K⁴, implies a sextic term H_K = Δ_K²/(A - B̄) of the right sign and
order for light molecules, and keeps the energy bounded at high K where the
truncated power series turns over (the divergence of the Watson expansion
for water is well known; Padé-type resummations were proposed for it by
Polyansky 1985, J. Mol. Spectrosc. 112, 79 — reference from memory).

Labels
------
Within a D2 block no two levels cross (same symmetry), so the energy order
inside a block equals that of the rigid rotor, where the energy rises with
τ = Ka - Kc.  The Ka parity of a block is the parity of K; the Kc parity
follows from the C2 rotation about the c axis, (-1)^Kc = s (-1)^(J+K) for
the Wang combination (|K> + s|-K>)/√2 (checked against the analytic J = 1
levels in the tests).

Line strengths
--------------
For a transition moment along molecule-fixed axis α the M-summed
rotational line strength (Hönl–London factor, normalised so that the sum
over all upper levels is 2J''+1) is ::

    A(J'τ' <- J''τ'') = (2J''+1) | Σ_{K,q} c'_{K+q} c''_K <J'' K 1 q | J' K+q> μ̂_q |²

with spherical components μ̂_0 = 1 (a type) or μ̂_{±1} = ∓1/√2 (b type,
along x) (Wigner–Eckart theorem for the direction-cosine operator; Zare
1988, *Angular Momentum*, eqs. 3.125, 6.46).  The Clebsch–Gordan
coefficients for j2 = 1 are the closed forms of Condon & Shortley (1935,
table 2³).
"""
from __future__ import annotations

import dataclasses
import functools

import numpy as np


@dataclasses.dataclass(frozen=True)
class WatsonConstants:
    """A-reduced rotational constants of one vibrational state, cm⁻¹."""

    A: float
    B: float
    C: float
    DJ: float = 0.0
    DJK: float = 0.0
    DK: float = 0.0
    dJ: float = 0.0
    dK: float = 0.0
    pade: bool = False


@dataclasses.dataclass
class RotorLevels:
    """Rotational levels J = 0..j_max of one vibrational state.

    Attributes
    ----------
    energy, ka, kc : list of ndarray
        Per J (index = J): eigenvalues (cm⁻¹, ascending within each D2
        block) and their Ka, Kc labels.
    vectors : list of ndarray
        Per J: eigenvectors as columns in the |J K> basis (row K + J).
    """

    j_max: int
    energy: list
    ka: list
    kc: list
    vectors: list

    def flat(self):
        """All levels as flat arrays ``(J, Ka, Kc, E)``."""
        j = np.concatenate([np.full(e.size, jj) for jj, e in enumerate(self.energy)])
        return j, np.concatenate(self.ka), np.concatenate(self.kc), np.concatenate(self.energy)


def hamiltonian(const: WatsonConstants, j: int) -> np.ndarray:
    """Watson A-reduced Hamiltonian matrix for one J in the |J K> basis, cm⁻¹."""
    k = np.arange(-j, j + 1, dtype=np.float64)
    x = j * (j + 1.0)
    bbar = 0.5 * (const.B + const.C)
    a_eff = const.A - bbar
    if const.pade and const.DK != 0.0 and a_eff > 0:
        k_term = a_eff * k ** 2 / (1.0 + const.DK * k ** 2 / a_eff)
    else:
        k_term = a_eff * k ** 2 - const.DK * k ** 4
    diag = bbar * x + k_term - const.DJ * x ** 2 - const.DJK * x * k ** 2
    h = np.diag(diag)
    # <K+2|J+^2|K> (real, positive) with the quartic asymmetry coefficients
    kk = k[:-2]
    ladder = np.sqrt(np.clip((x - kk * (kk + 1)) * (x - (kk + 1) * (kk + 2)), 0.0, None))
    coef = 0.25 * (const.B - const.C) - const.dJ * x - 0.5 * const.dK * ((kk + 2) ** 2 + kk ** 2)
    off = coef * ladder
    idx = np.arange(2 * j - 1)
    h[idx + 2, idx] = off
    h[idx, idx + 2] = off
    return h


@functools.lru_cache(maxsize=256)
def _wang_blocks(j: int):
    """Wang transformation and the four D2 blocks for one J (cached; independent of constants).

    Returns ``(U, blocks)``: U has columns (|K> + s|-K>)/√2 (K = 0: |0>), and
    ``blocks`` is a list of (column indices, Ka labels, Kc labels), one per
    D2 block, labels in rigid-rotor energy order.
    """
    n = 2 * j + 1
    u = np.zeros((n, n))
    cols = {}
    col = 0
    for kabs in range(0, j + 1):
        for s in ((1,) if kabs == 0 else (1, -1)):
            if kabs == 0:
                u[j, col] = 1.0
            else:
                u[j + kabs, col] = 1.0 / np.sqrt(2.0)
                u[j - kabs, col] = s / np.sqrt(2.0)
            cols.setdefault((kabs % 2, s), []).append(col)
            col += 1
    blocks = []
    for (pa, s), idx in sorted(cols.items()):
        # (-1)^Kc = s (-1)^(J+K): parity of Kc in this block
        pc = (j + pa + (0 if s == 1 else 1)) % 2
        labels = _labels_for_block(j, pa, pc)
        if len(labels) != len(idx):
            raise RuntimeError(f"label count mismatch at J={j} block {(pa, s)}")
        blocks.append((np.array(idx), np.array([t[0] for t in labels]), np.array([t[1] for t in labels])))
    return u, blocks


def _labels_for_block(j: int, pa: int, pc: int):
    """(Ka, Kc) labels with the given parities, sorted by τ = Ka - Kc (rigid-rotor energy order)."""
    labels = []
    for ka in range(0, j + 1):
        for kc in {j - ka, j + 1 - ka}:
            if 0 <= kc <= j and ka % 2 == pa and kc % 2 == pc:
                labels.append((ka, kc))
    labels.sort(key=lambda t: t[0] - t[1])
    return labels


def rotor_levels_many(consts, j_max: int, with_vectors: bool = True) -> list:
    """:func:`rotor_levels` for several states at once (one stacked eigh per J and D2 block)."""
    consts = list(consts)
    per_state = [dict(energy=[], ka=[], kc=[], vectors=[]) for _ in consts]
    for j in range(j_max + 1):
        u, blocks = _wang_blocks(j)
        h = np.stack([hamiltonian(c, j) for c in consts])
        e_parts, v_parts = [], []
        for idx, ka, kc in blocks:
            ub = u[:, idx]
            w, v = np.linalg.eigh(ub.T @ h @ ub)
            e_parts.append(w)
            v_parts.append(u[:, idx] @ v if with_vectors else None)
        ka_j = np.concatenate([b[1] for b in blocks])
        kc_j = np.concatenate([b[2] for b in blocks])
        e_all = np.concatenate(e_parts, axis=1)
        v_all = np.concatenate(v_parts, axis=2) if with_vectors else None
        for i, st in enumerate(per_state):
            st["energy"].append(e_all[i])
            st["ka"].append(ka_j)
            st["kc"].append(kc_j)
            st["vectors"].append(v_all[i] if with_vectors else None)
    return [RotorLevels(j_max=j_max, **st) for st in per_state]


def rotor_levels(const: WatsonConstants, j_max: int, with_vectors: bool = True) -> RotorLevels:
    """Diagonalise the Hamiltonian for J = 0..j_max (one D2 block at a time)."""
    return rotor_levels_many([const], j_max, with_vectors)[0]


def clebsch_gordan_j2_1(j1: int, m1, q: int, j: int) -> np.ndarray:
    """<j1 m1 1 q | j m1+q> for j = j1-1, j1, j1+1 (Condon & Shortley closed forms); vectorised in m1."""
    m1 = np.asarray(m1, dtype=np.float64)
    m = m1 + q
    a = float(j1)
    with np.errstate(invalid="ignore", divide="ignore"):
        if j == j1 + 1:
            if q == 1:
                v = np.sqrt((a + m) * (a + m + 1) / ((2 * a + 1) * (2 * a + 2)))
            elif q == 0:
                v = np.sqrt((a - m + 1) * (a + m + 1) / ((2 * a + 1) * (a + 1)))
            else:
                v = np.sqrt((a - m) * (a - m + 1) / ((2 * a + 1) * (2 * a + 2)))
        elif j == j1:
            if j1 == 0:
                return np.zeros_like(m)
            if q == 1:
                v = -np.sqrt((a + m) * (a - m + 1) / (2 * a * (a + 1)))
            elif q == 0:
                v = m / np.sqrt(a * (a + 1))
            else:
                v = np.sqrt((a - m) * (a + m + 1) / (2 * a * (a + 1)))
        elif j == j1 - 1:
            if j1 == 0:
                return np.zeros_like(m)
            if q == 1:
                v = np.sqrt((a - m) * (a - m + 1) / (2 * a * (2 * a + 1)))
            elif q == 0:
                v = -np.sqrt((a - m) * (a + m) / (a * (2 * a + 1)))
            else:
                v = np.sqrt((a + m + 1) * (a + m) / (2 * a * (2 * a + 1)))
        else:
            raise ValueError("j must be j1-1, j1 or j1+1")
    v = np.where(np.abs(m) <= j, np.nan_to_num(v), 0.0)
    return v


#: spherical components μ̂_q of a unit transition moment along a (z) or b (x)
_MU_HAT = {"a": {0: 1.0}, "b": {1: -1.0 / np.sqrt(2.0), -1: 1.0 / np.sqrt(2.0)},
           "c": {1: -1j / np.sqrt(2.0), -1: -1j / np.sqrt(2.0)}}


@functools.lru_cache(maxsize=4096)
def _moment_matrix(j_lo: int, j_up: int, band_type: str) -> np.ndarray:
    """Matrix <J' K'| μ̂ |J'' K''> (reduced, CG part) of shape (2J'+1, 2J''+1)."""
    m = np.zeros((2 * j_up + 1, 2 * j_lo + 1), dtype=complex if band_type == "c" else float)
    k_lo = np.arange(-j_lo, j_lo + 1)
    for q, amp in _MU_HAT[band_type].items():
        k_up = k_lo + q
        ok = np.abs(k_up) <= j_up
        cg = clebsch_gordan_j2_1(j_lo, k_lo[ok], q, j_up)
        m[k_up[ok] + j_up, k_lo[ok] + j_lo] += amp * cg
    return m


def honl_london(lower_vectors: np.ndarray, upper_vectors: np.ndarray, j_lo: int, j_up: int,
                band_type: str) -> np.ndarray:
    """Rotational line strengths A (n_upper, n_lower), Σ over all upper levels = 2J''+1."""
    t = upper_vectors.T @ _moment_matrix(j_lo, j_up, band_type) @ lower_vectors
    return (2 * j_lo + 1) * np.abs(t) ** 2
