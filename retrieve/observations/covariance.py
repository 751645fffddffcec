"""Covariance matrices of a dataset: reading, unit conversion, validation.

A covariance comes either from a separate file or from the dataset file
itself (a FITS extension named ``COVARIANCE``, or the ``covariance`` column
that :func:`retrieve.observations.writers.write_dataset` writes to ECSV).

Separate files
--------------
* ECSV: n columns of n rows, every column with the same unit (e.g. ``mJy2``).
* CSV: the units-header convention of :mod:`retrieve.observations.textfiles`
  (``c1 [mJy2],c2 [mJy2],...``), or bare numbers with a ``# unit: mJy2``
  comment line.
* ``.npy``: a plain float array; it carries no unit, so it is taken to be in
  the square of the dataset file's flux unit.
* FITS: a 2-D image (the extension named ``COVARIANCE`` if present, else the
  first 2-D image) with the unit in ``BUNIT``.

The unit must be a flux density squared; F_ν units (e.g. ``Jy2``) are
converted with the per-channel factors f_i of the flux conversion,
C'_ij = C_ij f_i f_j.

Checks: square, n × n with n the number of points of the dataset, finite,
symmetric (|C_ij − C_ji| ≤ 1e-8 √(C_ii C_jj), i.e. relative tolerance 1e-8
on the scale of the matrix entries), positive variances, positive-definite
(a Cholesky factorisation succeeds).  When a covariance is given its
diagonal supersedes the uncertainty column: the dataset's ``uncertainty``
becomes √diag(C).
"""
from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from .textfiles import parse_units_csv, read_text
from .units import UnitProblem, flux_factors, parse_unit, sqrt_flux_unit

SYMMETRY_RTOL = 1e-8


def _fits_image(path: Path, display: str):
    from astropy.io import fits

    try:
        with fits.open(path, memmap=False) as hdul:
            hdus = [h for h in hdul if h.name == "COVARIANCE"] or \
                   [h for h in hdul if h.is_image and h.data is not None and np.ndim(h.data) == 2]
            if not hdus:
                raise InputFileError(f"{display}: no 2-D image (covariance) in this FITS file")
            return np.array(hdus[0].data, dtype=float), hdus[0].header.get("BUNIT")
    except OSError as exc:
        raise InputFileError(f"{display}: not a readable FITS file ({exc})") from None


def _ecsv_matrix(path: Path, display: str):
    from astropy.table import Table

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            table = Table.read(path, format="ascii.ecsv")
    except Exception as exc:  # astropy raises many types for malformed ECSV
        raise InputFileError(f"{display}: not a valid ECSV file ({str(exc).splitlines()[0]})") from None
    units = {str(c.unit) if c.unit is not None else None for c in table.itercols()}
    if len(units) > 1:
        raise InputFileError(f"{display}: all covariance columns must have the same unit, "
                             f"got {sorted(map(str, units))}")
    unit = table[table.colnames[0]].unit if table.colnames else None
    if unit is None:
        unit = table.meta.get("unit")
    matrix = np.array([np.ma.filled(np.asarray(table[c], dtype=float), np.nan) for c in table.colnames]).T
    return matrix, unit


def _csv_matrix(path: Path, display: str):
    parsed = parse_units_csv(read_text(path, display), display, header_optional=True)
    units = set(parsed.units)
    if len(units) > 1:
        raise InputFileError(f"{display}: all covariance columns must have the same unit, "
                             f"got {sorted(map(str, units))}")
    unit = parsed.units[0] if parsed.units else None
    if unit is None:
        unit = parsed.meta.get("unit")
    matrix = np.empty((len(parsed.rows), len(parsed.names)))
    for i, row in enumerate(parsed.rows):
        for j, text in enumerate(row):
            try:
                matrix[i, j] = float(text)
            except ValueError:
                raise InputFileError(f"{display}: row {i + 1}, column {j + 1}: "
                                     f"value {text!r} is not a number") from None
    return matrix, unit


def _npy_matrix(path: Path, display: str):
    try:
        matrix = np.load(path, allow_pickle=False)
    except (OSError, ValueError) as exc:
        raise InputFileError(f"{display}: not a readable .npy array ({exc})") from None
    if not np.issubdtype(matrix.dtype, np.number):
        raise InputFileError(f"{display}: .npy array has dtype {matrix.dtype}, expected floats")
    return np.asarray(matrix, dtype=float), None


def read_covariance_file(path, fmt: str | None = None):
    """Read a covariance matrix as stored, without conversion.

    Parameters
    ----------
    path : str or Path
    fmt : {"ecsv", "csv", "npy", "fits"} or None
        Guessed from the suffix (and, for text, the ECSV signature) if None.

    Returns
    -------
    matrix : ndarray
    unit : str, astropy unit or None
        None for ``.npy`` (or a file that gives no unit).
    fmt : str
        The format read (``.npy`` alone may lack a unit, see the module docstring).
    """
    path = Path(path)
    display = str(path)
    if not path.is_file():
        raise InputFileError(f"{display}: covariance file not found")
    if path.stat().st_size == 0:
        raise InputFileError(f"{display}: file is empty")
    suffix = "".join(path.suffixes[-2:]).lower() if path.suffix.lower() == ".gz" else path.suffix.lower()
    if fmt is None:
        if suffix == ".npy":
            fmt = "npy"
        elif suffix in (".fits", ".fit", ".fts", ".fits.gz"):
            fmt = "fits"
        else:
            fmt = "ecsv" if read_text(path, display).lstrip().startswith("# %ECSV") else "csv"
    readers = {"npy": _npy_matrix, "fits": _fits_image, "ecsv": _ecsv_matrix, "csv": _csv_matrix}
    if fmt not in readers:
        raise InputFileError(f"{display}: unknown covariance format {fmt!r}; use one of {', '.join(readers)}")
    matrix, unit = readers[fmt](path, display)
    return matrix, unit, fmt


def check_matrix(matrix: np.ndarray, n_points: int, display: str, data_display: str) -> np.ndarray:
    """Shape, finiteness, positive variances and symmetry of a covariance in file units.

    Returns the exactly symmetrised matrix (C + Cᵀ)/2.
    """
    matrix = np.asarray(matrix, dtype=float)
    if matrix.ndim != 2 or matrix.shape[0] != matrix.shape[1]:
        raise InputFileError(f"{display}: covariance must be a square matrix, got shape {matrix.shape}")
    if matrix.shape[0] != n_points:
        raise InputFileError(f"{display}: covariance is {matrix.shape[0]}x{matrix.shape[0]} "
                             f"but {data_display} has {n_points} points")
    bad = np.argwhere(~np.isfinite(matrix))
    if bad.size:
        i, j = bad[0]
        raise InputFileError(f"{display}: row {i + 1}, column {j + 1}: value must be finite (got {matrix[i, j]})")
    diag = np.diag(matrix)
    if np.any(diag <= 0):
        i = int(np.flatnonzero(diag <= 0)[0])
        raise InputFileError(f"{display}: row {i + 1}, column {i + 1}: variance must be > 0 (got {diag[i]})")
    scale = np.sqrt(np.outer(diag, diag))
    asym = np.abs(matrix - matrix.T) > SYMMETRY_RTOL * scale
    if np.any(asym):
        i, j = np.argwhere(asym)[0]
        raise InputFileError(f"{display}: covariance is not symmetric: row {i + 1}, column {j + 1} = {matrix[i, j]} "
                             f"but row {j + 1}, column {i + 1} = {matrix[j, i]}")
    return 0.5 * (matrix + matrix.T)


def check_positive_definite(matrix: np.ndarray, display: str) -> None:
    """Raise :class:`InputFileError` unless a Cholesky factorisation of ``matrix`` succeeds."""
    try:
        np.linalg.cholesky(matrix)
    except np.linalg.LinAlgError:
        raise InputFileError(f"{display}: covariance is not positive-definite (Cholesky factorisation failed); "
                             "check for duplicated or perfectly correlated channels") from None


def covariance_to_internal(matrix: np.ndarray, unit, wavelength_um: np.ndarray, display: str) -> np.ndarray:
    """Convert a covariance in (flux unit)² to (W m⁻² µm⁻¹)² with C_ij f_i f_j."""
    if unit is None or (isinstance(unit, str) and not unit.strip()):
        raise InputFileError(f"{display}: covariance has no unit; give one (e.g. 'mJy2' in the header, "
                             "BUNIT in FITS, or '# unit: mJy2' in CSV)")
    try:
        root = sqrt_flux_unit(parse_unit(unit))
    except UnitProblem as exc:
        raise InputFileError(f"{display}: covariance {exc}") from None
    factors = flux_factors(root, wavelength_um)
    return matrix * np.outer(factors, factors)


def load_covariance(matrix: np.ndarray, unit, wavelength_um: np.ndarray, display: str, data_display: str,
                    default_unit=None) -> np.ndarray:
    """Validate a covariance as stored and return it in internal units.

    Parameters
    ----------
    matrix : ndarray
        As read (file units).
    unit : str, astropy unit or None
        Its unit; ``default_unit`` is used when None (``.npy`` files).
    wavelength_um : ndarray (n,)
        Wavelengths of the dataset's points (for F_ν conversion).
    display, data_display : str
        Covariance and dataset file names for messages.
    default_unit : astropy unit or None
    """
    checked = check_matrix(matrix, len(wavelength_um), display, data_display)
    internal = covariance_to_internal(checked, unit if unit is not None else default_unit, wavelength_um, display)
    check_positive_definite(internal, display)
    return internal
