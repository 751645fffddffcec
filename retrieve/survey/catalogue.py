"""The survey catalogue: one ECSV row per object, with its spectra and per-object overrides.

Columns (names are ours; case-sensitive):

``object`` (required)
    Object name; also its run-folder name, so letters, digits and ``_ . + -``
    only, starting with a letter or digit.  Unique.
``spectra`` (required)
    The object's dataset files separated by ``;``.  Each entry is ``PATH``
    or ``NAME=PATH`` exactly as the ``SPECTRUM`` arguments of
    ``retrieve fit`` (``NAME`` names the ``[[datasets]]`` entry; a name not
    in the configuration adds a dataset with its noise options off, which is
    how extra photometry of one object is given).  Relative paths are taken
    from the catalogue's folder.
``config`` (optional)
    A fit configuration for this object instead of ``--config`` (relative
    to the catalogue's folder; empty = the survey's).
``distance_pc``, ``distance_pc_err`` / ``parallax_mas``, ``parallax_mas_err`` (optional)
    Replace the configuration's distance: a value alone fixes it; with an
    error > 0 it becomes a truncated-Gaussian prior (mean = value,
    σ = error, cut at ±10 σ and kept positive).  Give at most one of the
    two quantities per row.
``seed`` (optional, integer)
    ``[sampler] seed`` for this object.
``fix_<parameter>`` (optional)
    Fix ``<parameter>`` to this value for this object (e.g. ``fix_log_g``).

An empty or masked cell means "no override".  Any other column is carried
into the survey summary unchanged (e.g. a spectral type), unless its name
is a near-miss of one of ours, which is an error.
"""
from __future__ import annotations

import dataclasses
import difflib
import math
import re
from pathlib import Path

import numpy as np
from astropy.table import Table

from ..errors import InputFileError

OBJECT, SPECTRA, CONFIG, SEED = "object", "spectra", "config", "seed"
DISTANCE_COLUMNS = {"distance_pc": "distance_pc_err", "parallax_mas": "parallax_mas_err"}
FIX_PREFIX = "fix_"
KNOWN = (OBJECT, SPECTRA, CONFIG, SEED, *DISTANCE_COLUMNS, *DISTANCE_COLUMNS.values())
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.+\-]*$")
PRIOR_HALF_WIDTH_SIGMA = 10.0


@dataclasses.dataclass(frozen=True)
class CatalogueEntry:
    """One object of the catalogue.

    Attributes
    ----------
    name : str
    row : int
        1-based data row in the catalogue file (for messages).
    spectra : tuple of str
        ``PATH`` / ``NAME=PATH`` items with absolute paths.
    config : Path or None
        Per-object configuration file.
    distance : tuple or None
        ``(parameter, value, error_or_None)``.
    seed : int or None
    fixed : dict
        ``fix_<parameter>`` overrides.
    info : dict
        Other columns, carried to the summary.
    """

    name: str
    row: int
    spectra: tuple
    config: Path | None = None
    distance: tuple | None = None
    seed: int | None = None
    fixed: dict = dataclasses.field(default_factory=dict)
    info: dict = dataclasses.field(default_factory=dict)


def _blank(value) -> bool:
    if value is None or value is np.ma.masked:
        return True
    if isinstance(value, str):
        return value.strip() == ""
    try:
        return not math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _number(value, where: str) -> float | None:
    if _blank(value):
        return None
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InputFileError(f"{where}: {value!r} is not a number") from None


def _resolve(path: str, base: Path) -> str:
    p = Path(path.strip())
    return str(p if p.is_absolute() else base / p)


def _spectra(cell, where: str, base: Path) -> tuple:
    if _blank(cell):
        raise InputFileError(f"{where}: no spectrum file; give PATH or NAME=PATH (several separated by ';')")
    items = []
    for part in str(cell).split(";"):
        part = part.strip()
        if not part:
            continue
        name, sep, path = part.partition("=")
        if sep and re.fullmatch(r"[A-Za-z][A-Za-z0-9_]*", name.strip()):
            items.append(f"{name.strip()}={_resolve(path, base)}")
        else:
            items.append(_resolve(part, base))
    return tuple(items)


def _check_columns(table: Table, where: str) -> None:
    for col in (OBJECT, SPECTRA):
        if col not in table.colnames:
            raise InputFileError(f"{where}: missing column {col!r} (columns: {', '.join(table.colnames)})")
    for col in table.colnames:
        if col in KNOWN or col.startswith(FIX_PREFIX):
            continue
        near = difflib.get_close_matches(col, KNOWN, n=1, cutoff=0.8)
        if near:
            raise InputFileError(f"{where}: column {col!r} looks like {near[0]!r}; rename it (or give it a "
                                 f"clearly different name to carry it into the summary)")


def _distance(row, where: str) -> tuple | None:
    found = []
    for col, err_col in DISTANCE_COLUMNS.items():
        value = _number(row[col], f"{where} column {col!r}") if col in row.colnames else None
        err = _number(row[err_col], f"{where} column {err_col!r}") if err_col in row.colnames else None
        if value is None:
            if err is not None:
                raise InputFileError(f"{where}: column {err_col!r} is given without {col!r}")
            continue
        if value <= 0 or (err is not None and err < 0):
            raise InputFileError(f"{where}: {col} = {value:g} ± {err} must be > 0 (error ≥ 0)")
        found.append((col, value, err if err else None))
    if len(found) > 1:
        raise InputFileError(f"{where}: both distance_pc and parallax_mas are given; keep one")
    return found[0] if found else None


def read_catalogue(path) -> list[CatalogueEntry]:
    """Read and check a survey catalogue (ECSV; layout in the module docstring).

    Raises
    ------
    InputFileError
        One line naming the file, column and 1-based data row.
    """
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: catalogue not found")
    try:
        table = Table.read(path, format="ascii.ecsv")
    except Exception as exc:  # astropy raises many types for a malformed file
        raise InputFileError(f"{path}: not a readable ECSV table ({type(exc).__name__}: {exc})") from None
    where = str(path)
    _check_columns(table, where)
    if len(table) == 0:
        raise InputFileError(f"{where}: the catalogue has no rows")
    base = path.parent
    entries, seen = [], {}
    for i, row in enumerate(table, start=1):
        w = f"{where} row {i}"
        name = "" if _blank(row[OBJECT]) else str(row[OBJECT]).strip()
        if not _NAME.match(name):
            raise InputFileError(f"{w} column 'object': {name!r} must start with a letter or digit and hold only "
                                 f"letters, digits and _ . + - (it names the run folder)")
        if name in seen:
            raise InputFileError(f"{w} column 'object': {name!r} repeats row {seen[name]}; names must be unique")
        seen[name] = i
        w = f"{where} row {i} ({name})"
        config = None
        if CONFIG in table.colnames and not _blank(row[CONFIG]):
            config = Path(_resolve(str(row[CONFIG]), base))
        seed = None
        if SEED in table.colnames:
            s = _number(row[SEED], f"{w} column 'seed'")
            if s is not None:
                if s != int(s) or s < 0:
                    raise InputFileError(f"{w} column 'seed': {s:g} must be a non-negative integer")
                seed = int(s)
        fixed = {}
        for col in table.colnames:
            if col.startswith(FIX_PREFIX):
                v = _number(row[col], f"{w} column {col!r}")
                if v is not None:
                    fixed[col[len(FIX_PREFIX):]] = v
        info = {col: row[col] for col in table.colnames
                if col not in KNOWN and not col.startswith(FIX_PREFIX)}
        entries.append(CatalogueEntry(name=name, row=i, spectra=_spectra(row[SPECTRA], f"{w} column 'spectra'", base),
                                      config=config, distance=_distance(row, w), seed=seed, fixed=fixed,
                                      info={k: (None if _blank(v) else v) for k, v in info.items()}))
    return entries


def object_config(base_config, entry: CatalogueEntry, where: str = "catalogue"):
    """The fit configuration of one object: ``base_config`` with the entry's overrides applied.

    Parameters
    ----------
    base_config : FitConfig
    entry : CatalogueEntry
    where : str
        Catalogue name for messages.

    Returns
    -------
    FitConfig
        With ``object_name`` = the entry's name and ``text`` regenerated
        (so that the run folder's ``config.toml`` is what was fitted).
    """
    from ..inference.config import config_to_toml
    from ..inference.priors import prior_from_mapping

    fixed, free = dict(base_config.fixed), dict(base_config.free)
    if entry.distance is not None:
        param, value, err = entry.distance
        for p in DISTANCE_COLUMNS:
            fixed.pop(p, None)
            free.pop(p, None)
        if err is None:
            fixed[param] = value
        else:
            lo = max(value - PRIOR_HALF_WIDTH_SIGMA * err, value * 1e-3)
            free[param] = prior_from_mapping(
                {"prior": "truncated-gaussian", "mean": value, "sigma": err, "low": lo,
                 "high": value + PRIOR_HALF_WIDTH_SIGMA * err}, f"{where} row {entry.row} {param}")
    for p, v in entry.fixed.items():
        free.pop(p, None)
        fixed[p] = v
    sampler = base_config.sampler
    if entry.seed is not None:
        sampler = dataclasses.replace(sampler, seed=entry.seed)
    cfg = base_config.replace(object_name=entry.name, fixed=fixed, free=free, sampler=sampler)
    header = (f"# fit configuration of {entry.name}: {base_config.where} with the overrides of "
              f"{where} row {entry.row} (written by retrieve batch)\n")
    return cfg.replace(text=header + config_to_toml(cfg))
