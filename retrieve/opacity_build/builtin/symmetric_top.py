"""Symmetric-top rotational levels and Hönl–London factors (parallel and perpendicular bands).

Levels (Herzberg 1945, *Infrared and Raman Spectra*, eq. I,22 and IV,50)::

    E(J, K) = B J(J+1) + (C - B) K² - D_J J²(J+1)² - D_JK J(J+1) K² - D_K K⁴
              - 2 C ζ K l                      (degenerate vibrations, l = ±1)

with signed K.  Line strengths use signed K'' and the Wigner–Eckart form
(2J''+1) <J'' K'' 1 q | J' K''+q>² |μ̂_q|² with |μ̂_0|² = 1 (parallel,
ΔK = 0) or |μ̂_{±1}|² = 1/2 (perpendicular, ΔK = ±1), so that for each
signed K'' the factors summed over all upper levels equal 2J''+1 (the
parallel case reproduces Herzberg's ((J+1)² - K²)/(J+1), (2J+1)K²/(J(J+1)),
(J² - K²)/J).
"""
from __future__ import annotations

import dataclasses

import numpy as np

from .asymmetric_top import clebsch_gordan_j2_1


@dataclasses.dataclass(frozen=True)
class SymmetricTopConstants:
    """Rotational constants of one vibrational state, cm⁻¹ (C is the K-axis constant)."""

    B: float
    C: float
    DJ: float = 0.0
    DJK: float = 0.0
    DK: float = 0.0
    zeta: float = 0.0


def energy(const: SymmetricTopConstants, j, k, l=0) -> np.ndarray:
    """Rotational energy E(J, K, l), cm⁻¹ (vectorised; K signed, l = 0 or ±1)."""
    j = np.asarray(j, dtype=np.float64)
    k = np.asarray(k, dtype=np.float64)
    x = j * (j + 1.0)
    return (const.B * x + (const.C - const.B) * k ** 2 - const.DJ * x ** 2 - const.DJK * x * k ** 2
            - const.DK * k ** 4 - 2.0 * const.C * const.zeta * k * np.asarray(l, dtype=np.float64))


def transitions(j_max: int, perpendicular: bool) -> dict:
    """All (J'', K'' signed, J', K') pairs with their Hönl–London factors (J'' ≤ j_max).

    Returns a dict of int arrays ``j_lo, k_lo, j_up, k_up`` and float ``hl``.
    """
    qs = ((1, 0.5), (-1, 0.5)) if perpendicular else ((0, 1.0),)
    parts = {k: [] for k in ("j_lo", "k_lo", "j_up", "k_up", "hl")}
    for j in range(j_max + 1):
        k = np.arange(-j, j + 1)
        for jp in (j - 1, j, j + 1):
            if jp < 0:
                continue
            for q, weight in qs:
                kp = k + q
                ok = np.abs(kp) <= jp
                cg = clebsch_gordan_j2_1(j, k[ok], q, jp)
                hl = (2 * j + 1) * weight * cg ** 2
                nz = hl > 1e-12
                parts["j_lo"].append(np.full(nz.sum(), j))
                parts["k_lo"].append(k[ok][nz])
                parts["j_up"].append(np.full(nz.sum(), jp))
                parts["k_up"].append(kp[ok][nz])
                parts["hl"].append(hl[nz])
    return {key: np.concatenate(v) for key, v in parts.items()}
