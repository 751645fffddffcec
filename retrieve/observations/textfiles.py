"""Plain-text input: safe decoding and the CSV units-header convention.

CSV with a units header (the project's own convention)
------------------------------------------------------
* Lines whose first non-blank character is ``#`` are comments.  A comment of
  the form ``# key: value`` is metadata (e.g. ``# resolving_power: 50``).
* The first other line is the header: comma-separated column names, each
  followed by its unit in square brackets, e.g.
  ``wavelength [um],flux [mJy],uncertainty [mJy]``.  Empty brackets ``[]``
  mean dimensionless; a text column (``filter``) has no brackets.
* Every further non-blank line is one data row with one value per column.
  Data rows are counted from 1 in messages.
"""
from __future__ import annotations

import csv
import dataclasses
import re
from pathlib import Path

from ..errors import InputFileError

_HEADER_FIELD = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*(?:\[(?P<unit>[^\[\]]*)\])?\s*$")
_META_LINE = re.compile(r"^#\s*(?P<key>[A-Za-z_][\w.-]*)\s*:\s*(?P<value>.*?)\s*$")


@dataclasses.dataclass
class CsvTable:
    """A parsed CSV file: column names, their units (None if none given), rows of strings."""

    names: list[str]
    units: list[str | None]
    rows: list[list[str]]
    meta: dict[str, str]


def read_text(path: Path, display: str) -> str:
    """Return the text of ``path``; one-line :class:`InputFileError` if unreadable, empty or binary."""
    try:
        data = Path(path).read_bytes()
    except OSError as exc:
        raise InputFileError(f"{display}: cannot read file ({exc.strerror or exc})") from None
    if not data.strip():
        raise InputFileError(f"{display}: file is empty")
    if b"\x00" in data:
        raise InputFileError(f"{display}: file is binary, not text; use ECSV, CSV with a units header, or FITS")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputFileError(f"{display}: file is not UTF-8 text (undecodable byte at offset {exc.start}); "
                             "use ECSV, CSV with a units header, or FITS") from None


def _split_header(fields: list[str], display: str) -> tuple[list[str], list[str | None]]:
    names, units = [], []
    for i, field in enumerate(fields, start=1):
        match = _HEADER_FIELD.match(field)
        if match is None or not match.group("name"):
            raise InputFileError(f"{display}: header field {i} {field!r} is not 'name [unit]'")
        names.append(match.group("name"))
        units.append(match.group("unit").strip() if match.group("unit") is not None else None)
    return names, units


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def parse_units_csv(text: str, display: str, header_optional: bool = False) -> CsvTable:
    """Parse CSV text following the units-header convention (module docstring).

    Parameters
    ----------
    text : str
    display : str
        File name for messages.
    header_optional : bool
        If true (covariance matrices) a first line made only of numbers is
        data, and the table gets names ``c1 … cn`` without units.

    Returns
    -------
    CsvTable
    """
    meta: dict[str, str] = {}
    lines = []
    for line in text.splitlines():
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            match = _META_LINE.match(stripped)
            if match:
                meta[match.group("key")] = match.group("value")
            continue
        lines.append(line)
    if not lines:
        raise InputFileError(f"{display}: no header or data lines (only comments)")
    records = list(csv.reader(lines, skipinitialspace=True))
    first = [f.strip() for f in records[0]]
    if header_optional and all(_is_number(f) for f in first):
        names, units, body = [f"c{i}" for i in range(1, len(first) + 1)], [None] * len(first), records
    else:
        names, units = _split_header(first, display)
        body = records[1:]
    rows = []
    for row_number, record in enumerate(body, start=1):
        if len(record) != len(names):
            raise InputFileError(f"{display}: row {row_number}: expected {len(names)} values "
                                 f"({', '.join(names)}), got {len(record)}")
        rows.append([f.strip() for f in record])
    return CsvTable(names=names, units=units, rows=rows, meta=meta)
