"""Finding and loading the opacity tables a model needs.

Search order for every file (first folder that has it wins):

1. ``[model] opacity_dir`` (the ``opacity_dir`` argument),
2. the environment variable ``RETRIEVE_OPACITY_DIR``,
3. the project's ``opacity_tables/`` folder beside the package.

File names: ``<species>.xsec.h5`` (cross sections), ``<species>.ktable.h5``
(correlated-k) and ``<pair>.cia.h5`` (collision-induced absorption).
"""
from __future__ import annotations

import dataclasses
import os
from collections.abc import Sequence
from pathlib import Path

from ..errors import OpacityTableError
from .table import OpacityTable, read_table

ENV_VAR = "RETRIEVE_OPACITY_DIR"
SUFFIX = {"cross_section": ".xsec.h5", "ktable": ".ktable.h5", "cia": ".cia.h5"}
MOLECULAR_KINDS = ("cross_section", "ktable")


def project_opacity_dir() -> Path:
    """The project's bundled ``opacity_tables/`` folder."""
    import retrieve

    return Path(retrieve.__file__).resolve().parents[1] / "opacity_tables"


def search_path(opacity_dir: str | os.PathLike | None = None) -> list[Path]:
    """Folders searched for tables, in order (see module docstring)."""
    folders = []
    if opacity_dir is not None:
        folders.append(Path(opacity_dir))
    if os.environ.get(ENV_VAR):
        folders.append(Path(os.environ[ENV_VAR]))
    folders.append(project_opacity_dir())
    return folders


def _find(name: str, kinds: Sequence[str], folders: Sequence[Path]) -> Path | None:
    for folder in folders:
        for kind in kinds:
            candidate = folder / f"{name}{SUFFIX[kind]}"
            if candidate.is_file():
                return candidate
    return None


def _intersect(ranges: list[tuple[float, float]]) -> tuple[float, float]:
    return max(r[0] for r in ranges), min(r[1] for r in ranges)


@dataclasses.dataclass
class OpacitySet:
    """The molecular and CIA tables of one model.

    Attributes
    ----------
    molecular : dict species -> OpacityTable
        All of one kind (:attr:`kind`).
    cia : dict pair -> OpacityTable
    kind : {"cross_section", "ktable"} or None
        None when there are no molecular tables.
    folders : list of Path
        The search path that was used (for messages).
    """

    molecular: dict
    cia: dict
    kind: str | None
    folders: list

    @classmethod
    def load(cls, species: Sequence[str], cia_pairs: Sequence[str] = (),
             opacity_dir: str | os.PathLike | None = None, kind: str | None = None) -> "OpacitySet":
        """Find and read the tables for ``species`` and ``cia_pairs``.

        Parameters
        ----------
        species : sequence of str
            Absorbers, e.g. ``["H2O", "CH4"]``.
        cia_pairs : sequence of str
            Collision pairs, e.g. ``["H2-H2", "H2-He"]``.
        opacity_dir : path-like, optional
            First folder to search.
        kind : {"cross_section", "ktable"}, optional
            Molecular table kind; default: whichever is found, cross sections
            first when a folder holds both.  All species must be of one kind.

        Raises
        ------
        OpacityTableError
            A table is missing (message names the species and the folders
            searched), malformed, or of a different kind from the others.
        """
        folders = search_path(opacity_dir)
        where = ", ".join(str(f) for f in folders)
        kinds = MOLECULAR_KINDS if kind is None else (kind,)
        molecular = {}
        for name in species:
            path = _find(name, kinds, folders)
            if path is None:
                expected = " or ".join(f"{name}{SUFFIX[k]}" for k in kinds)
                raise OpacityTableError(f"no opacity table for {name} ({expected}) in: {where}; "
                                        f"build it with 'retrieve opacity build' or set [model] opacity_dir")
            molecular[name] = read_table(path)
        found = {t.kind for t in molecular.values()}
        if len(found) > 1:
            detail = ", ".join(f"{s}: {t.kind}" for s, t in molecular.items())
            raise OpacityTableError(f"molecular tables mix kinds ({detail}); use one kind for all absorbers "
                                    f"(set [model] opacity_kind)")
        cia = {}
        for pair in cia_pairs:
            path = _find(pair, ("cia",), folders)
            if path is None:
                raise OpacityTableError(f"no CIA table for {pair} ({pair}.cia.h5) in: {where}")
            table = read_table(path)
            if table.kind != "cia":
                raise OpacityTableError(f"{path}: kind is {table.kind!r}, expected 'cia'")
            cia[pair] = table
        for name, table in molecular.items():
            if table.kind not in MOLECULAR_KINDS:
                raise OpacityTableError(f"{table.label}: kind {table.kind!r} cannot serve as absorber {name}")
        return cls(molecular=molecular, cia=cia, kind=found.pop() if found else None, folders=folders)

    @classmethod
    def from_tables(cls, molecular: dict, cia: dict | None = None) -> "OpacitySet":
        """Wrap tables already in memory (tests, notebooks)."""
        kinds = {t.kind for t in molecular.values()}
        if len(kinds) > 1:
            raise OpacityTableError(f"molecular tables mix kinds {sorted(kinds)}")
        return cls(molecular=dict(molecular), cia=dict(cia or {}), kind=kinds.pop() if kinds else None, folders=[])

    def coverage(self) -> dict:
        """Ranges valid for *all* tables: ``temperature_K``, ``pressure_bar``, ``wavelength_um``.

        Also ``per_table``: the coverage of each table by name.
        """
        tables: dict[str, OpacityTable] = {**self.molecular, **self.cia}
        per = {name: t.coverage() for name, t in tables.items()}
        out = {"per_table": per}
        for axis in ("temperature_K", "pressure_bar", "wavelength_um"):
            ranges = [c[axis] for c in per.values() if axis in c]
            if ranges:
                out[axis] = _intersect(ranges)
        return out
