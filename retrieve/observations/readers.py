"""Read spectra and photometry files into :class:`Dataset` / :class:`ObjectData`.

Formats
-------
ECSV
    An astropy Table written as ECSV; every numeric column carries its unit.
CSV with a units header
    The project's own convention (see :mod:`retrieve.observations.textfiles`)::

        # resolving_power: 40
        wavelength [um],flux [mJy],uncertainty [mJy]
        1.10,0.52,0.03
        ...

    Lines starting with ``#`` are comments; ``# key: value`` comments are metadata.
FITS
    The first binary (or ASCII) table extension; units from ``TUNITn``;
    metadata keywords in that extension's or the primary header; a
    covariance may sit in an image extension named ``COVARIANCE`` (unit in
    ``BUNIT``).

Columns (names are matched case-insensitively)
----------------------------------------------
=====================  ==================================================  ==========
role                   accepted names                                      required
=====================  ==================================================  ==========
wavelength             wavelength, wave, lambda                            spectra
flux                   flux                                                yes
uncertainty            uncertainty, error, err, sigma, flux_err            unless a covariance is given
channel edges          wavelength_low, wavelength_high                     no
resolving power        resolving_power (dimensionless, per channel)        no
filter                 filter (speclite names, e.g. twomass-Ks)            photometry
=====================  ==================================================  ==========

A ``filter`` column makes the dataset photometry; its wavelength column is
then optional (speclite's effective wavelength of each filter is used).
Wavelength units: any length (µm, nm, Å, m, cm).  Flux units: any F_λ
(W m-2 um-1, erg s-1 cm-2 A-1, ...) or F_ν (Jy, mJy, uJy) unit; F_ν is
converted at each point's wavelength.  The bare symbol ``A`` means ångström.

Metadata (all optional; function arguments win over metadata)
-------------------------------------------------------------
=================  ===============  ================================
meaning            ECSV meta / CSV  FITS keyword
=================  ===============  ================================
dataset name       dataset_name     DATANAME
kind               dataset_kind     DATAKIND (spectrum / photometry)
resolving power    resolving_power  RESPOWER
=================  ===============  ================================

Every other metadata entry is kept in ``Dataset.meta`` (e.g. simulation truths).

Adding a reader
---------------
Write ``_read_<fmt>(path, display) -> RawTable`` and register it in
``READERS`` and ``SUFFIXES``; validation and unit conversion are shared.
"""
from __future__ import annotations

import dataclasses
import re
import warnings
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from . import covariance as cov
from .dataset import Dataset, ObjectData
from .filters import check_filter_name, filter_effective_wavelength, unknown_filter_message
from .textfiles import parse_units_csv, read_text
from .units import (UnitProblem, check_flux_unit, check_wavelength_unit, flux_to_internal, parse_unit,
                    wavelength_to_um)

KINDS = ("spectrum", "photometry")

ALIASES = {
    "wavelength": ("wavelength", "wave", "lambda"),
    "flux": ("flux",),
    "uncertainty": ("uncertainty", "error", "err", "sigma", "flux_err"),
    "wavelength_low": ("wavelength_low",),
    "wavelength_high": ("wavelength_high",),
    "resolving_power": ("resolving_power",),
    "filter": ("filter",),
    "covariance": ("covariance",),
}

META_KEYS = {"name": ("dataset_name", "dataname"), "kind": ("dataset_kind", "datakind"),
             "resolving_power": ("resolving_power", "respower")}

_NAME_RE = re.compile(r"^[A-Za-z0-9_]+$")


@dataclasses.dataclass
class RawColumn:
    """One column as stored: values (numbers, strings or masked) and its unit (None if absent)."""

    name: str
    values: np.ndarray
    unit: object = None


@dataclasses.dataclass
class RawTable:
    """A file's columns, metadata and optional embedded covariance, before validation."""

    display: str
    columns: list[RawColumn]
    meta: dict
    covariance: tuple[np.ndarray, object] | None = None


# ----------------------------------------------------------------------------- format readers

def _read_ecsv(path: Path, display: str) -> RawTable:
    from astropy.table import Table

    read_text(path, display)  # empty / binary / undecodable files get a clear message first
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # unknown units become UnrecognizedUnit; reported below
            table = Table.read(path, format="ascii.ecsv")
    except Exception as exc:  # astropy raises many exception types for malformed ECSV
        raise InputFileError(f"{display}: not a valid ECSV file ({str(exc).splitlines()[0]})") from None
    columns = [RawColumn(name, np.ma.asarray(table[name]) if table.masked or hasattr(table[name], "mask")
                         else np.asarray(table[name]), table[name].unit) for name in table.colnames]
    return RawTable(display, columns, dict(table.meta))


def _read_csv(path: Path, display: str) -> RawTable:
    parsed = parse_units_csv(read_text(path, display), display)
    values = np.array(parsed.rows, dtype=object).reshape(len(parsed.rows), len(parsed.names))
    columns = [RawColumn(name, values[:, i], unit) for i, (name, unit) in enumerate(zip(parsed.names, parsed.units))]
    return RawTable(display, columns, dict(parsed.meta))


_FITS_STRUCTURAL = re.compile(r"^(SIMPLE|BITPIX|NAXIS\d*|EXTEND|XTENSION|PCOUNT|GCOUNT|TFIELDS|EXTNAME|"
                              r"T(TYPE|FORM|UNIT|DISP|NULL|SCAL|ZERO|DIM)\d+|COMMENT|HISTORY|CHECKSUM|DATASUM|)$")


def _read_fits(path: Path, display: str) -> RawTable:
    from astropy.io import fits

    if path.stat().st_size == 0:
        raise InputFileError(f"{display}: file is empty")
    try:
        with fits.open(path, memmap=False) as hdul:
            tables = [h for h in hdul if isinstance(h, (fits.BinTableHDU, fits.TableHDU))]
            if not tables:
                raise InputFileError(f"{display}: no table extension in this FITS file")
            hdu = tables[0]
            data = hdu.data
            meta = {}
            for header in (hdul[0].header, hdu.header):
                meta.update({k: v for k, v in header.items() if not _FITS_STRUCTURAL.match(k)})
            columns = []
            n_rows = 0 if data is None else len(data)
            for col in hdu.columns:
                values = np.array(data[col.name]) if data is not None else np.array([])
                if n_rows == 1 and values.ndim == 2:  # one row of vectors: the spectrum is in the row
                    values = values[0]
                if values.dtype.kind in "SU":
                    values = np.char.strip(values.astype(str))
                columns.append(RawColumn(col.name, values, col.unit))
            covariance = None
            if "COVARIANCE" in hdul:
                covariance = (np.array(hdul["COVARIANCE"].data, dtype=float), hdul["COVARIANCE"].header.get("BUNIT"))
    except OSError as exc:
        raise InputFileError(f"{display}: not a readable FITS file ({exc})") from None
    return RawTable(display, columns, meta, covariance)


READERS = {"ecsv": _read_ecsv, "csv": _read_csv, "fits": _read_fits}
SUFFIXES = {".ecsv": "ecsv", ".csv": "csv", ".fits": "fits", ".fit": "fits", ".fts": "fits", ".fits.gz": "fits"}


def detect_format(path: Path) -> str:
    """Format from the suffix, else from the content (FITS signature, ECSV header, else CSV)."""
    suffix = "".join(path.suffixes[-2:]).lower() if path.suffix.lower() == ".gz" else path.suffix.lower()
    with open(path, "rb") as fh:
        head = fh.read(80)
    if head.startswith(b"SIMPLE  ="):
        return "fits"
    if head.lstrip().startswith(b"# %ECSV"):
        return "ecsv"
    return SUFFIXES.get(suffix, "csv")


# ----------------------------------------------------------------------------- validation helpers

def _find(raw: RawTable, role: str) -> RawColumn | None:
    hits = [c for c in raw.columns if c.name.strip().lower() in ALIASES[role]]
    if len(hits) > 1:
        raise InputFileError(f"{raw.display}: columns {', '.join(repr(c.name) for c in hits)} "
                             f"are all {role}; keep one")
    return hits[0] if hits else None


def _missing(raw: RawTable, role: str, why: str = "") -> InputFileError:
    found = ", ".join(repr(c.name) for c in raw.columns) or "none"
    names = "/".join(ALIASES[role])
    return InputFileError(f"{raw.display}: missing column {role!r} ({names}){why}; found columns: {found}")


def _floats(raw: RawTable, col: RawColumn) -> np.ndarray:
    """Column as floats; one-line error naming the first missing, non-numeric or non-finite row."""
    values = col.values
    mask = np.ma.getmaskarray(values) if np.ma.isMaskedArray(values) else np.zeros(len(values), bool)
    data = np.ma.getdata(values)
    if data.dtype.kind in "fiu" and data.ndim == 1 and not mask.any():
        out = data.astype(float)
        if np.all(np.isfinite(out)):
            return out  # fast path; the loop below only runs to locate a bad row
    out = np.empty(len(values))
    for i, value in enumerate(np.ma.getdata(values)):
        where = f"{raw.display}: column {col.name!r}, row {i + 1}"
        if mask[i] or (isinstance(value, str) and not value.strip()):
            raise InputFileError(f"{where}: value is missing")
        try:
            out[i] = float(value)
        except (TypeError, ValueError):
            raise InputFileError(f"{where}: value {value!r} is not a number") from None
        if not np.isfinite(out[i]):
            raise InputFileError(f"{where}: value must be finite (got {out[i]})")
    return out


def _require_positive(raw: RawTable, col: RawColumn, values: np.ndarray) -> None:
    bad = np.flatnonzero(values <= 0)
    if bad.size:
        i = bad[0]
        raise InputFileError(f"{raw.display}: column {col.name!r}, row {i + 1}: value must be > 0 (got {values[i]:g})")


def _unit(raw: RawTable, col: RawColumn, check):
    if col.unit is None or (isinstance(col.unit, str) and not col.unit.strip()):
        raise InputFileError(f"{raw.display}: column {col.name!r} has no unit; give one "
                             f"(CSV header '{col.name} [unit]', ECSV column unit, or FITS TUNIT)")
    try:
        return check(parse_unit(col.unit))
    except UnitProblem as exc:
        raise InputFileError(f"{raw.display}: column {col.name!r}: {exc}") from None


def _check_ascending(raw: RawTable, col: RawColumn, values: np.ndarray) -> None:
    steps = np.diff(values)
    bad = np.flatnonzero(steps <= 0)
    if bad.size:
        i = bad[0] + 1
        what = "duplicate wavelength" if steps[i - 1] == 0 else "wavelengths must ascend"
        raise InputFileError(f"{raw.display}: column {col.name!r}, row {i + 1}: {what} "
                             f"({values[i]:g} after {values[i - 1]:g} in row {i}); sort the spectrum")


def _meta_value(meta: dict, key: str):
    lower = {str(k).lower(): v for k, v in meta.items()}
    for alias in META_KEYS[key]:
        if alias in lower:
            return lower[alias]
    return None


def _stem_name(path: Path) -> str:
    stem = path.name.split(".")[0]
    return re.sub(r"[^A-Za-z0-9_]+", "_", stem).strip("_") or "data"


# ----------------------------------------------------------------------------- assembly

def _kind(raw: RawTable, kind, has_filter: bool) -> str:
    kind = kind if kind is not None else _meta_value(raw.meta, "kind")
    if kind is None:
        return "photometry" if has_filter else "spectrum"
    kind = str(kind).strip().lower()
    if kind not in KINDS:
        raise InputFileError(f"{raw.display}: kind {kind!r} is not one of {', '.join(KINDS)}")
    if kind == "spectrum" and has_filter:
        raise InputFileError(f"{raw.display}: kind 'spectrum' but the file has a 'filter' column; "
                             "use kind 'photometry' or drop the column")
    return kind


def _resolving_power(raw: RawTable, argument, column, n: int):
    if argument is not None:
        value, where = argument, f"{raw.display}: resolving_power argument"
    elif column is not None:
        values = _floats(raw, column)
        _require_positive(raw, column, values)
        return values
    else:
        value, where = _meta_value(raw.meta, "resolving_power"), f"{raw.display}: metadata 'resolving_power'"
        if value is None:
            return None
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputFileError(f"{where}: must be a positive number (got {value!r})") from None
    if arr.ndim > 1 or (arr.ndim == 1 and arr.size != n) or not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise InputFileError(f"{where}: must be a positive number or one per point (got {value!r})")
    return float(arr) if arr.ndim == 0 else arr


def _filters(raw: RawTable, col: RawColumn) -> list[str]:
    names = []
    for i, value in enumerate(np.ma.getdata(col.values)):
        try:
            names.append(check_filter_name(str(value).strip()))
        except InputFileError:
            raise InputFileError(f"{raw.display}: column {col.name!r}, row {i + 1}: "
                                 f"{unknown_filter_message(str(value).strip())}") from None
    return names


def _wavelengths(raw, cols, kind, filters):
    if cols["wavelength"] is None:
        if kind == "spectrum":
            raise _missing(raw, "wavelength")
        return np.array([filter_effective_wavelength(f) for f in filters]), None
    col = cols["wavelength"]
    values = _floats(raw, col)
    _require_positive(raw, col, values)
    if kind == "spectrum":
        _check_ascending(raw, col, values)
    return wavelength_to_um(values, _unit(raw, col, check_wavelength_unit)), col


def _edges(raw, cols, wavelength_um):
    low, high = cols["wavelength_low"], cols["wavelength_high"]
    if low is None and high is None:
        return None
    if low is None or high is None:
        raise _missing(raw, "wavelength_low" if low is None else "wavelength_high",
                       " (channel edges need both wavelength_low and wavelength_high)")
    lo = wavelength_to_um(_floats(raw, low), _unit(raw, low, check_wavelength_unit))
    hi = wavelength_to_um(_floats(raw, high), _unit(raw, high, check_wavelength_unit))
    bad = np.flatnonzero(~((lo <= wavelength_um) & (wavelength_um <= hi) & (lo < hi)))
    if bad.size:
        i = bad[0]
        raise InputFileError(f"{raw.display}: column {high.name!r}, row {i + 1}: channel edges must satisfy "
                             f"low < high with the wavelength between them (got {lo[i]:g}-{hi[i]:g} um "
                             f"around {wavelength_um[i]:g} um)")
    return np.column_stack([lo, hi])


def _assemble(raw: RawTable, path: Path, name, kind, resolving_power, has_external_cov: bool):
    """Validate and convert a raw table; return (dataset, flux unit of the file, name given explicitly)."""
    cols = {role: _find(raw, role) for role in ALIASES}
    kind = _kind(raw, kind, cols["filter"] is not None)
    if kind == "photometry" and cols["filter"] is None:
        raise _missing(raw, "filter", " (photometry needs one speclite filter name per point)")
    if cols["flux"] is None:
        raise _missing(raw, "flux")
    has_cov = has_external_cov or raw.covariance is not None or cols["covariance"] is not None
    if cols["uncertainty"] is None and not has_cov:
        raise _missing(raw, "uncertainty", " (or give a covariance)")
    n = len(cols["flux"].values)
    if n == 0:
        raise InputFileError(f"{raw.display}: no data rows")
    filters = _filters(raw, cols["filter"]) if cols["filter"] is not None else None
    wavelength_um, _ = _wavelengths(raw, cols, kind, filters)
    flux_unit = _unit(raw, cols["flux"], check_flux_unit)
    flux = flux_to_internal(_floats(raw, cols["flux"]), flux_unit, wavelength_um)
    if cols["uncertainty"] is not None:
        col = cols["uncertainty"]
        sigma_file = _floats(raw, col)
        _require_positive(raw, col, sigma_file)
        uncertainty = flux_to_internal(sigma_file, _unit(raw, col, check_flux_unit), wavelength_um)
    else:
        uncertainty = None
    name = name if name is not None else _meta_value(raw.meta, "name")
    explicit = name is not None
    name = str(name).strip() if explicit else _stem_name(path)
    if not _NAME_RE.match(name):
        raise InputFileError(f"{raw.display}: dataset name {name!r} must use only letters, digits and '_'")
    meta = {k: v for k, v in raw.meta.items()
            if str(k).lower() not in {a for aliases in META_KEYS.values() for a in aliases}}
    dataset = Dataset(name=name, kind=kind, wavelength_um=wavelength_um, flux=flux,
                      uncertainty=uncertainty, resolving_power=_resolving_power(
                          raw, resolving_power, cols["resolving_power"], n),
                      channel_edges_um=_edges(raw, cols, wavelength_um), filters=filters,
                      source=path, meta=meta)
    return dataset, flux_unit, explicit


def _attach_covariance(dataset: Dataset, raw: RawTable, flux_unit, covariance, cov_fmt) -> None:
    """Read, validate and convert the covariance (separate file first, else embedded) into ``dataset``."""
    cols_cov = _find(raw, "covariance")
    default_unit = None
    if covariance is not None:
        matrix, unit, fmt = cov.read_covariance_file(covariance, fmt=cov_fmt)
        display = str(covariance)
        if fmt == "npy":  # a bare array has no unit: it is in the dataset file's flux unit squared
            default_unit = flux_unit ** 2
    elif raw.covariance is not None:
        (matrix, unit), display = raw.covariance, f"{raw.display}[COVARIANCE]"
    elif cols_cov is not None:
        matrix, unit, display = np.asarray(np.ma.filled(cols_cov.values, np.nan), dtype=float), cols_cov.unit, \
            f"{raw.display}: column {cols_cov.name!r}"
    else:
        return
    dataset.covariance = cov.load_covariance(matrix, unit, dataset.wavelength_um, display, raw.display,
                                             default_unit=default_unit)
    dataset.uncertainty = np.sqrt(np.diag(dataset.covariance))  # the diagonal supersedes the column


def read_dataset(path, name: str | None = None, kind: str | None = None, covariance=None,
                 resolving_power=None, fmt: str | None = None, covariance_fmt: str | None = None) -> Dataset:
    """Read one spectrum or photometry file (see the module docstring for formats).

    Parameters
    ----------
    path : str or Path
        ECSV, CSV with a units header, or FITS table.
    name : str, optional
        Dataset name; default: metadata ``dataset_name``, else the file stem.
    kind : {"spectrum", "photometry"}, optional
        Default: metadata, else photometry if there is a ``filter`` column.
    covariance : str or Path, optional
        Separate covariance file (see :mod:`retrieve.observations.covariance`);
        it replaces any covariance inside the dataset file.
    resolving_power : float or array_like, optional
        λ/Δλ; overrides the column and the metadata.
    fmt : {"ecsv", "csv", "fits"}, optional
        Default: from the suffix / content.
    covariance_fmt : {"ecsv", "csv", "npy", "fits"}, optional

    Returns
    -------
    Dataset
        In internal units (µm, W m⁻² µm⁻¹).  With a covariance, ``uncertainty``
        is √diag(C): the covariance diagonal supersedes the uncertainty column.

    Raises
    ------
    InputFileError
        One line naming the file, column and (1-based data) row at fault.
    """
    return _read(path, name, kind, covariance, resolving_power, fmt, covariance_fmt)[0]


def _read(path, name, kind, covariance, resolving_power, fmt, covariance_fmt):
    path = Path(path)
    display = str(path)
    if not path.is_file():
        raise InputFileError(f"{display}: no such file")
    fmt = detect_format(path) if fmt is None else str(fmt).lower()
    if fmt not in READERS:
        raise InputFileError(f"{display}: unknown format {fmt!r}; use one of {', '.join(READERS)}")
    raw = READERS[fmt](path, display)
    dataset, flux_unit, explicit = _assemble(raw, path, name, kind, resolving_power, covariance is not None)
    _attach_covariance(dataset, raw, flux_unit, covariance, covariance_fmt)
    return dataset, explicit


def _unique(name: str, taken: set[str]) -> str:
    candidate, k = name, 2
    while candidate in taken:
        candidate, k = f"{name}_{k}", k + 1
    return candidate


def read_object(paths_or_specs, name: str | None = None) -> ObjectData:
    """Read several datasets of one object (e.g. an IFS spectrum plus photometry).

    Parameters
    ----------
    paths_or_specs : iterable of (str, Path, dict)
        A path, or a dict with ``file`` (or ``path``) and optional
        ``name``, ``kind``, ``covariance``, ``resolving_power``, ``fmt`` passed
        to :func:`read_dataset`.
    name : str, optional
        Object name; default: the first file's stem.

    Returns
    -------
    ObjectData
        Names not given explicitly (argument or metadata) come from file stems
        and are made unique with ``_2``, ``_3``, ... suffixes.
    """
    specs = [s if isinstance(s, dict) else {"file": s} for s in paths_or_specs]
    if not specs:
        raise InputFileError(f"object {name!r}: no dataset files given")
    datasets, taken = [], set()
    for spec in specs:
        spec = dict(spec)
        path = spec.pop("file", None) or spec.pop("path", None)
        if path is None:
            raise InputFileError(f"object {name!r}: dataset entry {spec} has no 'file'")
        unknown = set(spec) - {"name", "kind", "covariance", "resolving_power", "fmt", "covariance_fmt"}
        if unknown:
            raise InputFileError(f"{path}: unknown dataset option(s) {sorted(unknown)}")
        dataset, explicit = _read(path, spec.get("name"), spec.get("kind"), spec.get("covariance"),
                                  spec.get("resolving_power"), spec.get("fmt"), spec.get("covariance_fmt"))
        if not explicit:
            dataset.name = _unique(dataset.name, taken)
        taken.add(dataset.name)
        datasets.append(dataset)
    return ObjectData(name=name if name is not None else _stem_name(Path(specs[0].get("file") or specs[0]["path"])),
                      datasets=datasets)
