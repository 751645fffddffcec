"""Turn per-band line arrays of a generated molecule into one :class:`LineList`.

Shared by the polyatomic generators (H₂O, CH₄, NH₃): window the lines, drop
those that stay below a strength floor at every temperature of interest, sort
by wavenumber and attach the molecule's partition function and broadening.
"""
from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping

import numpy as np

from ...constants import C2_CM_K, MASS_AMU
from ..linelist import LineList


def peak_strength(nu, el, s, t_ref: float, q_ref: float, partitions: Mapping[float, float]) -> np.ndarray:
    """Largest HITRAN-form strength S(T) of each line over the temperatures in ``partitions`` (T → Q)."""
    smax = np.zeros_like(s)
    for t, q in partitions.items():
        st = (s * q_ref / q * np.exp(-C2_CM_K * el * (1.0 / t - 1.0 / t_ref))
              * np.expm1(-C2_CM_K * nu / t) / np.expm1(-C2_CM_K * nu / t_ref))
        smax = np.maximum(smax, st)
    return smax


def assemble_line_list(bands: Iterable[tuple[np.ndarray, np.ndarray, np.ndarray]], *, species: str,
                       isotopologue: str, abundance: float, t_ref: float,
                       partition: Callable[[float], float], broadening: Mapping[str, float],
                       wn_min: float, wn_max: float, min_strength: float,
                       check_temperatures: Iterable[float]) -> LineList:
    """One abundance-weighted LineList from ``(wavenumber, E'', S(t_ref))`` arrays per band.

    A line is kept when it lies in [``wn_min``, ``wn_max``] cm⁻¹ and its strength
    exceeds ``min_strength`` at one of ``check_temperatures`` at least.
    """
    q_ref = partition(t_ref)
    partitions = {t: partition(t) for t in check_temperatures}
    kept = []
    for nu, el, s in bands:
        window = (nu >= wn_min) & (nu <= wn_max)
        nu, el, s = nu[window], el[window], s[window]
        strong = peak_strength(nu, el, s, t_ref, q_ref, partitions) >= min_strength
        kept.append((nu[strong], el[strong], s[strong]))
    nu, el, s = (np.concatenate([k[i] for k in kept]) for i in range(3))
    order = np.argsort(nu)
    n = nu.size
    return LineList(species=species, wavenumber_cm=nu[order], e_lower_cm=el[order], mass_amu=MASS_AMU[species],
                    partition=partition, strength_ref=s[order], t_ref=t_ref, partition_ref=q_ref,
                    isotopologue_abundance=abundance, abundance_weighted=True, isotopologue=isotopologue,
                    gamma_h2=np.full(n, broadening["gamma_h2"]), n_h2=np.full(n, broadening["n_h2"]),
                    gamma_he=np.full(n, broadening["gamma_he"]), n_he=np.full(n, broadening["n_he"]))
