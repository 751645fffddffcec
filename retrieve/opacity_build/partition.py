"""Partition functions Q(T): from levels, from tabulated files, and a per-species registry.

The registry maps an absorber (``"CO"``) or an isotopologue key
(``"CO:2"`` = HITRAN local isotopologue 2) to a callable ``Q(T_K)``.  The
built-in molecular-physics modules (:mod:`retrieve.opacity_build.builtin`)
register level-structure-based Q(T) for the bundled molecules; users can
register their own or pass a ``.pf`` file to the readers.
"""
from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

import numpy as np

from ..constants import C2_CM_K
from ..errors import InputFileError, UserError

_REGISTRY: dict[str, Callable] = {}


def partition_sum(energies_cm, degeneracies, temperature_K):
    """Q(T) = Σ g_i exp(-c2 E_i / T) (E in cm⁻¹, total degeneracy g_i incl. nuclear spin).

    Vectorised over ``temperature_K`` (scalar in -> float out).
    """
    e = np.asarray(energies_cm, dtype=np.float64).ravel()
    g = np.asarray(degeneracies, dtype=np.float64).ravel()
    t = np.asarray(temperature_K, dtype=np.float64)
    q = np.array([np.sum(g * np.exp(-C2_CM_K * e / ti)) for ti in np.atleast_1d(t).ravel()])
    return float(q[0]) if t.ndim == 0 else q.reshape(t.shape)


class TabulatedPartition:
    """Q(T) interpolated linearly in (T, ln Q) between tabulated points (picklable).

    Outside the tabulated range it raises :class:`UserError` naming the source.
    """

    def __init__(self, temperatures_K, values, source: str = "table"):
        t = np.asarray(temperatures_K, dtype=np.float64)
        q = np.asarray(values, dtype=np.float64)
        order = np.argsort(t)
        self.t, self.lnq, self.source = t[order], np.log(q[order]), source

    def __call__(self, temperature_K):
        t = np.asarray(temperature_K, dtype=np.float64)
        if np.any(t < self.t[0]) or np.any(t > self.t[-1]):
            raise UserError(f"{self.source}: partition function tabulated for {self.t[0]:g}-{self.t[-1]:g} K, "
                            f"needed at {np.min(t):g}-{np.max(t):g} K; supply a wider table")
        out = np.exp(np.interp(t, self.t, self.lnq))
        return float(out) if out.ndim == 0 else out


def read_partition_file(path: str | os.PathLike) -> TabulatedPartition:
    """Read a two-column ``T Q`` file (ExoMol ``.pf``; '#' comments allowed) -> callable Q(T)."""
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: partition-function file not found")
    try:
        data = np.loadtxt(path, comments="#", usecols=(0, 1), ndmin=2)
    except ValueError as exc:
        raise InputFileError(f"{path}: not a two-column 'T Q' table ({exc})") from None
    good = data[:, 1] > 0
    if good.sum() < 2:
        raise InputFileError(f"{path}: fewer than two positive Q values")
    return TabulatedPartition(data[good, 0], data[good, 1], source=str(path))


def register_partition_function(species: str, func: Callable) -> None:
    """Register ``func(T_K) -> Q`` for ``species`` (or ``"SPECIES:iso"``), replacing any previous one."""
    _REGISTRY[species] = func


def _load_builtin() -> None:
    """Import the built-in molecular-physics package, which registers its Q(T) (if installed)."""
    try:
        import importlib
        importlib.import_module("retrieve.opacity_build.builtin")
    except ImportError:
        pass


def get_partition_function(species: str, isotopologue: int | str | None = None) -> Callable:
    """The registered Q(T) for an absorber (isotopologue key ``"CO:2"`` tried first).

    Raises :class:`UserError` if none is registered.
    """
    keys = [f"{species}:{isotopologue}"] if isotopologue is not None else []
    if isotopologue in (None, 1, "1"):
        keys.append(species)
    for attempt in range(2):
        for key in keys:
            if key in _REGISTRY:
                return _REGISTRY[key]
        if attempt == 0:
            _load_builtin()
    raise UserError(f"no partition function registered for {keys[0]}; pass a two-column 'T Q' file "
                    "(e.g. ExoMol .pf) with --partition or register one with register_partition_function")


def registered_species() -> list[str]:
    """Keys currently in the registry."""
    _load_builtin()
    return sorted(_REGISTRY)
