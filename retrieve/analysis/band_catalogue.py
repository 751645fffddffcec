"""The band catalogue: where each absorber absorbs, and where to measure its depth.

The shipped catalogue is ``retrieve/data/bands.toml`` (its header comment
documents the layout); a user file in the same layout adds bands, and an
entry with the same molecule and band label replaces the shipped one
(``load_catalogue(user_file)``; command-line option ``--band-catalogue``).

Wavelengths are in µm.  Every entry carries a ``source``: a paper or
database, or "value from memory" where the number was recalled.
"""
from __future__ import annotations

import dataclasses
import math
import tomllib
from importlib import resources
from pathlib import Path

from ..config_keys import check_keys, expect_type
from ..errors import InputFileError

SHIPPED = "bands.toml"
ENTRY_KEYS = ("molecule", "band", "center_um", "window_um", "continuum_um", "source", "note")
REQUIRED = ("molecule", "band", "center_um", "window_um", "source")


@dataclasses.dataclass(frozen=True)
class Band:
    """One absorption band.

    Attributes
    ----------
    molecule : str
    band : str
        Label unique per molecule (e.g. ``"1.6um"``).
    center_um : float
    window_lo_um, window_hi_um : float
        Range in which the band absorbs.
    continuum_um : tuple of (float, float)
        Reference windows for a band depth (may be empty).
    source : str
    note : str
    """

    molecule: str
    band: str
    center_um: float
    window_lo_um: float
    window_hi_um: float
    continuum_um: tuple = ()
    source: str = ""
    note: str = ""

    @property
    def key(self) -> tuple[str, str]:
        return self.molecule, self.band


def _interval(value, where: str, key: str) -> tuple[float, float]:
    if (not isinstance(value, list) or len(value) != 2
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)):
        raise InputFileError(f"{where}: key {key!r} must be [lo, hi] in µm, got {value!r}")
    lo, hi = float(value[0]), float(value[1])
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo < hi):
        raise InputFileError(f"{where}: key {key!r} must satisfy 0 < lo < hi, got {value!r}")
    return lo, hi


def _parse_entry(entry, where: str) -> Band:
    if not isinstance(entry, dict):
        raise InputFileError(f"{where}: must be a table")
    try:
        check_keys(entry, ENTRY_KEYS, where, required=REQUIRED)
        molecule = expect_type(entry["molecule"], str, where, "molecule")
        label = expect_type(entry["band"], str, where, "band")
        center = float(expect_type(entry["center_um"], (int, float), where, "center_um"))
        source = expect_type(entry["source"], str, where, "source")
        note = expect_type(entry.get("note", ""), str, where, "note")
    except Exception as exc:  # ConfigError -> the file's error type, same one line
        if isinstance(exc, InputFileError):
            raise
        raise InputFileError(str(exc)) from None
    lo, hi = _interval(entry["window_um"], where, "window_um")
    if not lo <= center <= hi:
        raise InputFileError(f"{where}: center_um {center} lies outside window_um [{lo}, {hi}]")
    cont = entry.get("continuum_um", [])
    if not isinstance(cont, list):
        raise InputFileError(f"{where}: key 'continuum_um' must be a list of [lo, hi]")
    continuum = tuple(_interval(c, where, "continuum_um") for c in cont)
    if not source.strip():
        raise InputFileError(f"{where}: key 'source' is empty; name a paper, database or 'value from memory'")
    return Band(molecule, label, center, lo, hi, continuum, source, note)


def parse_catalogue(text: str, where: str) -> list[Band]:
    """Parse the TOML text of a catalogue (``[[band]]`` tables)."""
    try:
        mapping = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputFileError(f"{where}: not valid TOML ({exc})") from None
    extra = [k for k in mapping if k != "band"]
    if extra:
        raise InputFileError(f"{where}: unknown top-level key {extra[0]!r}; bands go in [[band]] tables")
    entries = mapping.get("band", [])
    if not isinstance(entries, list):
        raise InputFileError(f"{where}: 'band' must be an array of tables ([[band]])")
    bands, seen = [], set()
    for i, entry in enumerate(entries):
        b = _parse_entry(entry, f"{where} [[band]] #{i + 1}")
        if b.key in seen:
            raise InputFileError(f"{where} [[band]] #{i + 1}: duplicate band {b.band!r} of {b.molecule}")
        seen.add(b.key)
        bands.append(b)
    return bands


def shipped_catalogue() -> list[Band]:
    """The catalogue shipped with the package."""
    text = resources.files("retrieve").joinpath("data", SHIPPED).read_text(encoding="utf-8")
    return parse_catalogue(text, f"retrieve/data/{SHIPPED}")


def load_catalogue(user_file=None) -> list[Band]:
    """Shipped bands merged with an optional user file (same molecule + band label replaces).

    Parameters
    ----------
    user_file : path-like, optional

    Returns
    -------
    list of Band
        Sorted by molecule, then centre wavelength.
    """
    merged = {b.key: b for b in shipped_catalogue()}
    if user_file is not None:
        path = Path(user_file)
        if not path.is_file():
            raise InputFileError(f"{path}: band catalogue not found")
        for b in parse_catalogue(path.read_text(encoding="utf-8"), str(path)):
            merged[b.key] = b
    return sorted(merged.values(), key=lambda b: (b.molecule, b.center_um))


def bands_of(catalogue, molecule: str, wavelength_range_um: tuple[float, float] | None = None) -> list[Band]:
    """Bands of ``molecule`` (optionally only those overlapping a wavelength range)."""
    out = [b for b in catalogue if b.molecule == molecule]
    if wavelength_range_um is not None:
        lo, hi = wavelength_range_um
        out = [b for b in out if b.window_hi_um > lo and b.window_lo_um < hi]
    return out
