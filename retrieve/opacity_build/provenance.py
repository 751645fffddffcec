"""Provenance records for built tables: inputs with checksums, parameters, version, date."""
from __future__ import annotations

import datetime as _dt
import hashlib
import os
import platform
from pathlib import Path


def file_sha256(path: str | os.PathLike, block: int = 1 << 20) -> str:
    """sha256 (hex) of a file's bytes, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(block), b""):
            digest.update(chunk)
    return digest.hexdigest()


def build_date(fixed: str | None = None) -> str:
    """ISO-8601 UTC date of the build.

    ``fixed`` wins; else ``$SOURCE_DATE_EPOCH`` (reproducible-builds convention,
    reproducible-builds.org) if set; else now.  A fixed date gives bit-identical
    tables for identical inputs.
    """
    if fixed is not None:
        return str(fixed)
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch:
        when = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
    else:
        when = _dt.datetime.now(tz=_dt.timezone.utc).replace(microsecond=0)
    return when.isoformat()


def make_provenance(inputs=(), parameters: dict | None = None, date: str | None = None,
                    extra: dict | None = None) -> dict:
    """A JSON-ready provenance dict.

    Parameters
    ----------
    inputs : iterable of path-like
        Input files; each is recorded with its name and sha256.
    parameters : dict
        Build parameters.
    date : str or None
        Fixed date (see :func:`build_date`).
    extra : dict
        Merged in last (e.g. reader options, notes).
    """
    from .. import __version__

    record = {
        "software": "retrieve",
        "version": __version__,
        "date": build_date(date),
        "inputs": [{"path": Path(p).name, "sha256": file_sha256(p)} for p in inputs],
        "parameters": dict(parameters or {}),
        "python": platform.python_version(),
    }
    record.update(extra or {})
    return record
