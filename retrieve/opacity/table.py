"""The opacity table file format (HDF5) shared by the builder and the forward model.

One file holds one absorber (or one collision pair) on a rectilinear grid.
See ``opacity_tables/README.md`` for the user-facing description.

Layout (format ``retrieve-opacity``, version 1)
------------------------------------------------
Root attributes:

``format``          the string ``"retrieve-opacity"``
``format_version``  integer, currently 1
``kind``            ``"cross_section"`` | ``"ktable"`` | ``"cia"``
``species``         absorber name (``"H2O"``) or collision pair (``"H2-H2"``)
``provenance``      JSON text: inputs (path, sha256), build parameters, project version, date
``checksum``        sha256 (hex) of the axes and data, see :func:`compute_checksum`

Datasets (all ascending axes):

``wavelength_um``        (n_w,)       bin centres in µm
``wavelength_edges_um``  (n_w+1,)     bin edges in µm (required for ``ktable``; optional otherwise)
``temperature_K``        (n_T,)
``pressure_bar``         (n_P,)       absent for ``cia``
``g_points``, ``g_weights``  (n_g,)  Gauss–Legendre nodes/weights on [0, 1] (``ktable`` only)
``log10_value``          float32, log10 of the tabulated quantity, floored at :data:`LOG10_FLOOR`:
    * cross_section: shape (n_P, n_T, n_w), cm² molecule⁻¹
    * ktable:        shape (n_P, n_T, n_w, n_g), cm² molecule⁻¹, ascending along g
    * cia:           shape (n_T, n_w), cm⁵ molecule⁻²

Interpolation (in the forward model): linear in log10 P and linear in T of
log10 value; wavelength is never interpolated at run time (all tables in a
model share one wavelength grid; use :func:`regrid_wavelength` at set-up).
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from pathlib import Path

import numpy as np

from ..errors import OpacityTableError

FORMAT_NAME = "retrieve-opacity"
FORMAT_VERSION = 1
KINDS = ("cross_section", "ktable", "cia")
LOG10_FLOOR = -60.0  # log10 of the smallest stored value (cm^2 or cm^5); effectively zero opacity


@dataclasses.dataclass
class OpacityTable:
    """An opacity table held in memory.

    Parameters
    ----------
    kind : {"cross_section", "ktable", "cia"}
    species : str
    wavelength_um : ndarray (n_w,)
    temperature_K : ndarray (n_T,)
    log10_value : ndarray
        See module docstring for the shape per kind.
    pressure_bar : ndarray (n_P,) or None
        None for ``cia``.
    wavelength_edges_um : ndarray (n_w+1,) or None
    g_points, g_weights : ndarray (n_g,) or None
        ``ktable`` only.
    provenance : dict
    path : Path or None
        Where it was read from.
    """

    kind: str
    species: str
    wavelength_um: np.ndarray
    temperature_K: np.ndarray
    log10_value: np.ndarray
    pressure_bar: np.ndarray | None = None
    wavelength_edges_um: np.ndarray | None = None
    g_points: np.ndarray | None = None
    g_weights: np.ndarray | None = None
    provenance: dict = dataclasses.field(default_factory=dict)
    path: Path | None = None

    def __post_init__(self):
        self.wavelength_um = np.asarray(self.wavelength_um, dtype=np.float64)
        self.temperature_K = np.asarray(self.temperature_K, dtype=np.float64)
        self.log10_value = np.asarray(self.log10_value, dtype=np.float32)
        for name in ("pressure_bar", "wavelength_edges_um", "g_points", "g_weights"):
            value = getattr(self, name)
            if value is not None:
                setattr(self, name, np.asarray(value, dtype=np.float64))
        validate(self)

    @property
    def label(self) -> str:
        return str(self.path) if self.path is not None else f"{self.species} {self.kind} table"

    @property
    def checksum(self) -> str:
        return compute_checksum(self)

    def coverage(self) -> dict:
        """Axis ranges, for messages, ``opacity info`` and config validation."""
        cov = {
            "wavelength_um": (float(self.wavelength_um[0]), float(self.wavelength_um[-1])),
            "temperature_K": (float(self.temperature_K[0]), float(self.temperature_K[-1])),
        }
        if self.pressure_bar is not None:
            cov["pressure_bar"] = (float(self.pressure_bar[0]), float(self.pressure_bar[-1]))
        return cov


def _axes(table: OpacityTable) -> list[tuple[str, np.ndarray | None]]:
    return [
        ("wavelength_um", table.wavelength_um),
        ("wavelength_edges_um", table.wavelength_edges_um),
        ("temperature_K", table.temperature_K),
        ("pressure_bar", table.pressure_bar),
        ("g_points", table.g_points),
        ("g_weights", table.g_weights),
    ]


def compute_checksum(table: OpacityTable) -> str:
    """sha256 over kind, species, axes (float64 little-endian) and data (float32 little-endian)."""
    digest = hashlib.sha256()
    digest.update(f"{table.kind}|{table.species}|".encode())
    for name, arr in _axes(table):
        if arr is not None:
            digest.update(name.encode())
            digest.update(np.ascontiguousarray(arr, dtype="<f8").tobytes())
    digest.update(np.ascontiguousarray(table.log10_value, dtype="<f4").tobytes())
    return digest.hexdigest()


def _expected_shape(table: OpacityTable) -> tuple[int, ...]:
    n_w, n_t = table.wavelength_um.size, table.temperature_K.size
    if table.kind == "cia":
        return (n_t, n_w)
    n_p = table.pressure_bar.size
    if table.kind == "cross_section":
        return (n_p, n_t, n_w)
    return (n_p, n_t, n_w, table.g_points.size)


def validate(table: OpacityTable) -> None:
    """Raise :class:`OpacityTableError` (one line) if axes or shapes are inconsistent."""
    where = table.label
    if table.kind not in KINDS:
        raise OpacityTableError(f"{where}: unknown table kind {table.kind!r}; expected one of {KINDS}")
    if table.kind != "cia" and table.pressure_bar is None:
        raise OpacityTableError(f"{where}: {table.kind} table has no pressure_bar axis")
    if table.kind == "ktable":
        if table.g_points is None or table.g_weights is None or table.wavelength_edges_um is None:
            raise OpacityTableError(f"{where}: ktable needs g_points, g_weights and wavelength_edges_um")
        if not np.isclose(table.g_weights.sum(), 1.0, rtol=1e-6):
            raise OpacityTableError(f"{where}: g_weights sum to {table.g_weights.sum():.6g}, expected 1")
    for name, arr in _axes(table):
        if arr is None:
            continue
        if arr.ndim != 1 or arr.size < 1 or not np.all(np.isfinite(arr)):
            raise OpacityTableError(f"{where}: axis {name} must be a finite 1-d array")
        if name in ("wavelength_um", "wavelength_edges_um", "temperature_K", "pressure_bar") and arr.size > 1:
            if np.any(np.diff(arr) <= 0):
                raise OpacityTableError(f"{where}: axis {name} is not strictly ascending")
        if name in ("wavelength_um", "temperature_K", "pressure_bar") and np.any(arr <= 0):
            raise OpacityTableError(f"{where}: axis {name} has non-positive values")
    if table.wavelength_edges_um is not None and table.wavelength_edges_um.size != table.wavelength_um.size + 1:
        raise OpacityTableError(f"{where}: wavelength_edges_um must have n_w+1 entries")
    expected = _expected_shape(table)
    if table.log10_value.shape != expected:
        raise OpacityTableError(
            f"{where}: data shape {table.log10_value.shape} does not match axes {expected}")
    if not np.all(np.isfinite(table.log10_value)):
        raise OpacityTableError(f"{where}: data contain NaN or inf")


def write_table(table: OpacityTable, path: str | os.PathLike) -> Path:
    """Write ``table`` to ``path`` atomically (temporary file, fsync, rename)."""
    import h5py

    validate(table)
    path = Path(path)
    tmp = path.with_name(path.name + ".partial")
    with h5py.File(tmp, "w") as f:
        f.attrs["format"] = FORMAT_NAME
        f.attrs["format_version"] = FORMAT_VERSION
        f.attrs["kind"] = table.kind
        f.attrs["species"] = table.species
        f.attrs["provenance"] = json.dumps(table.provenance, sort_keys=True)
        f.attrs["checksum"] = compute_checksum(table)
        for name, arr in _axes(table):
            if arr is not None:
                f.create_dataset(name, data=arr.astype(np.float64))
        # shuffle+gzip: reproducible bytes for identical inputs, good ratio on smooth log10 data
        f.create_dataset("log10_value", data=table.log10_value.astype(np.float32),
                         compression="gzip", compression_opts=6, shuffle=True)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    os.replace(tmp, path)
    return path


def read_table(path: str | os.PathLike, verify: bool = True) -> OpacityTable:
    """Read an opacity table; refuse it (one-line :class:`OpacityTableError`) if malformed.

    Parameters
    ----------
    path : path-like
    verify : bool
        Recompute the checksum and compare with the stored one.
    """
    import h5py

    path = Path(path)
    if not path.is_file():
        raise OpacityTableError(f"{path}: opacity table not found")
    try:
        f = h5py.File(path, "r")
    except OSError:
        raise OpacityTableError(f"{path}: not an HDF5 opacity table (cannot open as HDF5)") from None
    with f:
        if f.attrs.get("format") != FORMAT_NAME:
            raise OpacityTableError(f"{path}: not a {FORMAT_NAME} table (attribute 'format' missing or wrong)")
        version = int(f.attrs.get("format_version", -1))
        if version != FORMAT_VERSION:
            raise OpacityTableError(f"{path}: table format version {version}, this program reads {FORMAT_VERSION}")
        missing = [k for k in ("kind", "species", "checksum") if k not in f.attrs]
        if missing or "log10_value" not in f:
            raise OpacityTableError(f"{path}: missing {', '.join(missing or ['log10_value'])}")
        arrays = {name: f[name][()] for name in
                  ("wavelength_um", "wavelength_edges_um", "temperature_K", "pressure_bar", "g_points", "g_weights")
                  if name in f}
        if "wavelength_um" not in arrays or "temperature_K" not in arrays:
            raise OpacityTableError(f"{path}: missing wavelength_um or temperature_K axis")
        stored = str(f.attrs["checksum"])
        table = OpacityTable(kind=str(f.attrs["kind"]), species=str(f.attrs["species"]),
                             log10_value=f["log10_value"][()], provenance=json.loads(f.attrs.get("provenance", "{}")),
                             path=path, **arrays)
    if verify and table.checksum != stored:
        raise OpacityTableError(f"{path}: checksum mismatch (file corrupted or edited); rebuild it with 'retrieve opacity build'")
    return table


def regrid_wavelength(table: OpacityTable, wavelength_um: np.ndarray) -> OpacityTable:
    """Return a copy of a cross_section or cia table on another wavelength grid.

    Linear interpolation of log10 value in wavelength; points outside the table's
    range get :data:`LOG10_FLOOR` (no opacity).  For set-up only, never the hot path.
    k-tables cannot be regridded this way (their bins are not samples).
    """
    if table.kind == "ktable":
        raise OpacityTableError(f"{table.label}: k-tables cannot be regridded; build them on the model's bins")
    wavelength_um = np.asarray(wavelength_um, dtype=np.float64)
    src = table.log10_value
    flat = src.reshape(-1, src.shape[-1])
    out = np.empty((flat.shape[0], wavelength_um.size), dtype=np.float32)
    for i, row in enumerate(flat):
        out[i] = np.interp(wavelength_um, table.wavelength_um, row, left=LOG10_FLOOR, right=LOG10_FLOOR)
    return dataclasses.replace(table, wavelength_um=wavelength_um, wavelength_edges_um=None,
                               log10_value=out.reshape(src.shape[:-1] + (wavelength_um.size,)))
