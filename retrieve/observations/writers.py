"""Write a :class:`Dataset` as ECSV, atomically.

The file holds ``wavelength [um]``, ``flux`` and ``uncertainty``
[W m-2 um-1], and where present ``wavelength_low``/``wavelength_high``,
a per-channel ``resolving_power``, ``filter`` names and the ``covariance``
(one row of the matrix per data row, unit (W m-2 um-1)²).  Metadata:
``dataset_name``, ``dataset_kind``, a scalar ``resolving_power``, then
``Dataset.meta`` and the ``meta`` argument (e.g. simulation truths).
:func:`retrieve.observations.readers.read_dataset` reads it back unchanged.

The table is written to a temporary file in the target folder, flushed and
fsync'ed, then moved over the target with :func:`os.replace`, so a crash or
an error never leaves a half-written file under the final name.
"""
from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from .dataset import Dataset
from .units import FLUX_UNIT, WAVELENGTH_UNIT


def _plain(value):
    """Metadata values YAML can write: numpy scalars/arrays become Python numbers/lists."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    return value


def dataset_table(dataset: Dataset, meta: dict | None = None):
    """The astropy Table (with units and metadata) that :func:`write_dataset` writes."""
    from astropy.table import Table

    table = Table()
    table["wavelength"] = np.asarray(dataset.wavelength_um, dtype=float) * WAVELENGTH_UNIT
    if dataset.channel_edges_um is not None:
        table["wavelength_low"] = dataset.channel_edges_um[:, 0] * WAVELENGTH_UNIT
        table["wavelength_high"] = dataset.channel_edges_um[:, 1] * WAVELENGTH_UNIT
    table["flux"] = np.asarray(dataset.flux, dtype=float) * FLUX_UNIT
    sigma = dataset.uncertainty if dataset.covariance is None else np.sqrt(np.diag(dataset.covariance))
    table["uncertainty"] = np.asarray(sigma, dtype=float) * FLUX_UNIT
    if dataset.filters is not None:
        table["filter"] = list(dataset.filters)
    if dataset.resolving_power is not None and np.ndim(dataset.resolving_power) == 1:
        table["resolving_power"] = np.asarray(dataset.resolving_power, dtype=float)
    if dataset.covariance is not None:
        table["covariance"] = np.asarray(dataset.covariance, dtype=float) * FLUX_UNIT ** 2
    table.meta["dataset_name"] = dataset.name
    table.meta["dataset_kind"] = dataset.kind
    if dataset.resolving_power is not None and np.ndim(dataset.resolving_power) == 0:
        table.meta["resolving_power"] = float(dataset.resolving_power)
    for key, value in {**dataset.meta, **(meta or {})}.items():
        table.meta[str(key)] = _plain(value)
    return table


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def atomic_write_text(path: Path, text: str, overwrite: bool = False) -> None:
    """Write ``text`` to ``path`` via temp file + fsync + :func:`os.replace`.

    Raises
    ------
    InputFileError
        If ``path`` exists and ``overwrite`` is false, or the folder is missing.
    """
    path = Path(path)
    if path.exists() and not overwrite:
        raise InputFileError(f"{path}: file exists; remove it or pass overwrite=True")
    if not path.parent.is_dir():
        raise InputFileError(f"{path}: folder {path.parent} does not exist")
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    # mkstemp creates the file 0600; give the result the permissions a plain open() would
    os.fchmod(fd, 0o666 & ~_current_umask())
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    try:  # make the rename itself durable
        dir_fd = os.open(path.parent, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)
    except OSError:
        pass  # some file systems do not allow fsync on folders; the data are already safe


def write_dataset(dataset: Dataset, path, meta: dict | None = None, overwrite: bool = False) -> Path:
    """Write ``dataset`` to an ECSV file (see the module docstring).

    Parameters
    ----------
    dataset : Dataset
    path : str or Path
    meta : dict, optional
        Extra metadata (e.g. ``{"truth": {...}}``); overrides ``dataset.meta`` keys.
    overwrite : bool
        Replace an existing file; by default an existing file is an error.

    Returns
    -------
    Path
    """
    buffer = io.StringIO()
    dataset_table(dataset, meta).write(buffer, format="ascii.ecsv")
    atomic_write_text(Path(path), buffer.getvalue(), overwrite=overwrite)
    return Path(path)
