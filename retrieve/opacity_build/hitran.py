"""Reader for HITRAN 160-character line records (``.par``), plain or bz2, streamed in chunks.

Record layout (HITRAN 2004+, Rothman et al. 2005, JQSRT 96, 139, Table 1;
columns 0-based, half-open):

=========  =========  ======  ==============================================
field      columns    format  meaning
=========  =========  ======  ==============================================
molecule   0-2        I2      HITRAN molecule number
iso        2-3        I1      local isotopologue id (1-9, 0 = 10, A = 11 ...)
nu         3-15       F12.6   wavenumber, cm⁻¹
S          15-25      E10.3   strength at 296 K, cm molecule⁻¹ (abundance-weighted)
A          25-35      E10.3   Einstein A, s⁻¹
gamma_air  35-40      F5.4    air-broadened HWHM at 296 K, cm⁻¹ atm⁻¹
gamma_self 40-45      F5.3    self-broadened HWHM, cm⁻¹ atm⁻¹
E''        45-55      F10.4   lower-state energy, cm⁻¹
n_air      55-59      F4.2    temperature exponent of gamma_air
delta_air  59-67      F8.6    air pressure shift, cm⁻¹ atm⁻¹
g', g''    146-153, 153-160  F7.1   upper / lower statistical weights
=========  =========  ======  ==============================================

Extended records (HITRAN planetary broadeners, Tan et al. 2022, ApJS 262, 40)
append comma-separated values after column 160: γ_He, err, ref, n_He, err,
ref, γ_H2, err, ref, n_H2, err, ref, then CO2 values (not used here).
"""
from __future__ import annotations

import bz2
import os
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from ..constants import MASS_AMU
from ..errors import InputFileError
from .fixedwidth import parse_exponent, parse_fixed, parse_int
from .linelist import LineList
from .partition import get_partition_function, read_partition_file

RECORD_LENGTH = 160

#: HITRAN molecule numbers (HITRAN online documentation; value from memory, checked against hapi in tests).
HITRAN_MOLECULES = {
    1: "H2O", 2: "CO2", 3: "O3", 4: "N2O", 5: "CO", 6: "CH4", 7: "O2", 8: "NO", 9: "SO2", 10: "NO2",
    11: "NH3", 12: "HNO3", 13: "OH", 14: "HF", 15: "HCl", 16: "HBr", 17: "HI", 18: "ClO", 19: "OCS",
    20: "H2CO", 21: "HOCl", 22: "N2", 23: "HCN", 24: "CH3Cl", 25: "H2O2", 26: "C2H2", 27: "C2H6",
    28: "PH3", 29: "COF2", 30: "SF6", 31: "H2S", 32: "HCOOH", 33: "HO2", 34: "O", 35: "ClONO2",
    36: "NO+", 37: "HOBr", 38: "C2H4", 39: "CH3OH", 40: "CH3Br", 41: "CH3CN", 42: "CF4", 43: "C4H2",
    44: "HC3N", 45: "H2", 46: "CS", 47: "SO3",
}

#: (molecule, isotopologue) -> (mass amu, terrestrial abundance) (HITRAN isotopologue
#: table; values as in hapi's ISO table, checked against hapi.molecularMass / hapi.abundance in tests).
HITRAN_ISOTOPOLOGUES = {
    (1, 1): (18.010565, 0.997317), (2, 1): (43.989830, 0.984204), (3, 1): (47.984745, 0.992901),
    (4, 1): (44.001062, 0.990333), (5, 1): (27.994915, 0.986544), (5, 2): (28.998270, 0.011084),
    (5, 3): (29.999161, 0.001978), (5, 4): (28.999130, 3.68e-4), (5, 5): (31.002516, 2.2225e-5),
    (5, 6): (30.002485, 4.13292e-6), (6, 1): (16.031300, 0.988274), (7, 1): (31.989830, 0.995262),
    (11, 1): (17.026549, 0.995872), (23, 1): (27.010899, 0.985114), (26, 1): (26.015650, 0.977599),
    (28, 1): (33.997241, 0.999533), (31, 1): (33.987721, 0.949884),
}

_ISO_CODES = {ord(str(i)): i for i in range(1, 10)}
_ISO_CODES[ord("0")] = 10
_ISO_CODES.update({ord(c): 11 + k for k, c in enumerate("ABCDEFGH")})

#: Fields available from :func:`parse_records`: name -> (start, width, decimals, kind).
FIELDS = {
    "molecule": (0, 2, 0, "i"), "wavenumber": (3, 12, 6, "f"), "strength": (15, 10, 3, "e"),
    "einstein_a": (25, 10, 3, "e"), "gamma_air": (35, 5, 4, "f"), "gamma_self": (40, 5, 3, "f"),
    "e_lower": (45, 10, 4, "f"), "n_air": (55, 4, 2, "f"), "delta_air": (59, 8, 6, "f"),
    "g_upper": (146, 7, 1, "f"), "g_lower": (153, 7, 1, "f"),
}
#: Fields the reader needs for building tables.
BUILD_FIELDS = ("molecule", "isotopologue", "wavenumber", "strength", "e_lower")
_BLOCK = 8192  # rows parsed at once: keeps the strided column reads in cache


def _iso_ids(column: np.ndarray) -> np.ndarray:
    lut = np.zeros(256, dtype=np.int64)
    for code, iso in _ISO_CODES.items():
        lut[code] = iso
    return lut[column]


def parse_records(records: np.ndarray, fields=None) -> dict:
    """Parse an ``(n, ≥160)`` uint8 array of HITRAN records into a dict of arrays.

    Parameters
    ----------
    fields : iterable of str or None
        Names from :data:`FIELDS` plus ``"isotopologue"``; None = all.
    """
    names = list(FIELDS) + ["isotopologue"] if fields is None else list(fields)
    n = records.shape[0]
    out = {name: np.empty(n, dtype=np.int64 if name in ("molecule", "isotopologue") else np.float64)
           for name in names}
    for s in range(0, n, _BLOCK):
        block = records[s:s + _BLOCK]
        for name in names:
            if name == "isotopologue":
                out[name][s:s + _BLOCK] = _iso_ids(block[:, 2])
                continue
            start, width, dec, kind = FIELDS[name]
            if kind == "i":
                out[name][s:s + _BLOCK] = parse_int(block, start, width)
            elif kind == "e":
                out[name][s:s + _BLOCK] = parse_exponent(block, start, width, dec)
            else:
                out[name][s:s + _BLOCK] = parse_fixed(block, start, width, dec)
    return out


_TAIL_FIELDS = {"gamma_he": 1, "n_he": 4, "gamma_h2": 7, "n_h2": 10}  # after the leading comma


def _parse_tail_columns(tails: np.ndarray) -> dict | None:
    """Vectorised tail parsing when every row has its commas in the same columns (else None)."""
    commas = np.flatnonzero(tails[0] == ord(","))
    if commas.size < 11 or not np.all(tails[:, commas] == ord(",")):
        return None
    bounds = list(commas) + [tails.shape[1]]
    out = {}
    for key, c in _TAIL_FIELDS.items():
        a, b = bounds[c - 1] + 1, bounds[c]
        text = np.ascontiguousarray(tails[:, a:b]).view(f"S{b - a}").ravel()
        try:
            out[key] = text.astype(np.float64)
        except ValueError:  # blank or odd entries somewhere: let the row-wise parser handle them
            return None
    return out


def parse_broadening_tail(tails) -> dict:
    """γ/n for He and H2 from the comma-separated tails of extended records (blank -> NaN).

    ``tails``: list of bytes, or an (n, width) uint8 array of equal-length tails.
    """
    if isinstance(tails, np.ndarray):
        fast = _parse_tail_columns(tails)
        if fast is not None:
            return fast
        tails = [bytes(row) for row in tails]
    n = len(tails)
    out = {k: np.full(n, np.nan) for k in _TAIL_FIELDS}
    cols = _TAIL_FIELDS
    for i, tail in enumerate(tails):
        parts = tail.split(b",")
        for key, c in cols.items():
            if c < len(parts):
                text = parts[c].strip()
                if text:
                    try:
                        out[key][i] = float(text)
                    except ValueError:
                        pass
    return out


def _open(path: Path):
    if path.suffix == ".bz2":
        return bz2.open(path, "rb")
    return open(path, "rb")


def iter_record_blocks(path: str | os.PathLike, chunk_lines: int = 1_000_000) -> Iterator[tuple[np.ndarray, list | None]]:
    """Yield ``(records (n, 160) uint8, tails or None)`` for successive chunks of a ``.par`` file.

    ``tails`` holds the bytes after column 160 (extended records) when present.  For plain
    160-character files the records are a view into a buffer that is reused for the next
    chunk (no per-chunk allocation); copy them if they must outlive the iteration step.
    """
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: HITRAN line file not found")
    with _open(path) as fh:
        first = fh.readline()
        if not first:
            return
        line_len = len(first)
        if line_len > RECORD_LENGTH and first.endswith(b"\n"):
            limit = None if path.suffix == ".bz2" else path.stat().st_size
            yield from _fixed_blocks(fh, first, line_len, chunk_lines, limit, path)
            return
        pending = first
        while True:
            data = fh.read(chunk_lines * 300)
            if not data:
                if pending:
                    yield _records_from_bytes(pending, path, None)
                return
            buf = pending + data
            cut = buf.rfind(b"\n") + 1
            buf, pending = buf[:cut], buf[cut:]
            if buf:
                yield _records_from_bytes(buf, path, None)


def _fill(fh, view: memoryview, start: int) -> int:
    """readinto until ``view`` is full or the stream ends; returns the bytes now held."""
    filled = start
    while filled < len(view):
        n = fh.readinto(view[filled:])
        if not n:
            break
        filled += n
    return filled


def _fixed_blocks(fh, first: bytes, line_len: int, chunk_lines: int, limit: int | None, path: Path):
    """Chunks of a file of equal-length records, read into one reused buffer."""
    size = max(1, int(chunk_lines)) * line_len
    if limit is not None:
        size = min(size, limit + line_len)
    buf = np.empty(size, dtype=np.uint8)
    view = memoryview(buf)
    buf[:line_len] = np.frombuffer(first, dtype=np.uint8)
    start = line_len
    while True:
        filled = _fill(fh, view, start)
        eof = filled < size
        if filled == 0:
            return
        rows = buf[:filled - filled % line_len].reshape(-1, line_len)
        if filled % line_len == 0 and np.all(rows[:, -1] == ord("\n")):
            eol = 2 if rows[0, -2] == ord("\r") else 1
            tails = rows[:, RECORD_LENGTH:line_len - eol] if line_len - eol > RECORD_LENGTH else None
            yield rows[:, :RECORD_LENGTH], tails
            start = 0
        else:  # irregular lengths somewhere in this chunk: general path
            data = bytes(view[:filled])
            cut = len(data) if eof else data.rfind(b"\n") + 1
            if cut:
                yield _records_from_bytes(data[:cut], path, None)
            rest = data[cut:]
            buf[:len(rest)] = np.frombuffer(rest, dtype=np.uint8)
            start = len(rest)
        if eof:
            return


def _records_from_bytes(buf: bytes, path: Path, line_len: int | None):
    arr = np.frombuffer(buf, dtype=np.uint8)
    if line_len is not None and arr.size % line_len == 0:
        rows = arr.reshape(-1, line_len)
        if np.all(rows[:, -1] == ord("\n")):
            return rows[:, :RECORD_LENGTH], None
    lines = [ln.rstrip(b"\r") for ln in buf.split(b"\n")]
    lines = [ln for ln in lines if ln.strip()]
    short = [i for i, ln in enumerate(lines) if len(ln) < RECORD_LENGTH]
    if short:
        raise InputFileError(f"{path}: record '{lines[short[0]][:30].decode(errors='replace')}...' is shorter "
                             f"than {RECORD_LENGTH} characters; is this a HITRAN .par file?")
    records = np.frombuffer(b"".join(ln[:RECORD_LENGTH] for ln in lines), dtype=np.uint8)
    records = records.reshape(-1, RECORD_LENGTH)
    tails = [ln[RECORD_LENGTH:] for ln in lines]
    return records, (tails if any(tails) else None)


def read_hitran(path: str | os.PathLike, species: str | None = None, isotopologues=(1,),
                partition=None, mass_amu: float | None = None, wavenumber_range=None,
                use_air_broadening: bool = False, chunk_lines: int = 1_000_000,
                molecule: int | None = None) -> Iterator[LineList]:
    """Stream a HITRAN ``.par`` file as LineList chunks (one per chunk and isotopologue).

    Parameters
    ----------
    path : path-like
        ``.par`` or ``.par.bz2``; extended records with H2/He broadening are recognised.
    species : str or None
        Absorber name; default from the HITRAN molecule number of the first record.
    isotopologues : iterable of int or None
        HITRAN local isotopologue ids to keep (default: the most abundant only); None = all.
    partition : callable, path, dict or None
        Q(T): a callable, a two-column ``T Q`` file, a dict {iso: callable or path}; None = the
        registry (:func:`retrieve.opacity_build.partition.get_partition_function`).
    mass_amu : float or None
        Override the isotopologue mass.
    wavenumber_range : (float, float) or None
        Keep lines in [low, high) cm⁻¹ only.
    use_air_broadening : bool
        Use γ_air, n_air for both H2 and He where no H2/He values are given (otherwise the
        defaults of :data:`retrieve.opacity_build.linelist.DEFAULT_BROADENING`).
    chunk_lines : int
        Records per chunk (memory bound: ~0.5 kB per record while parsing).
    molecule : int or None
        HITRAN molecule number to keep; default that of the first record (other molecules
        in the file are skipped).
    """
    path = Path(path)
    wanted = None if isotopologues is None else {int(i) for i in isotopologues}
    fields = list(BUILD_FIELDS) + (["gamma_air", "n_air"] if use_air_broadening else [])
    q_cache: dict = {}
    for records, tails in iter_record_blocks(path, chunk_lines):
        cols = parse_records(records, fields)
        if tails is not None and (not isinstance(tails, np.ndarray) or tails.shape[1] > 0):
            cols.update(parse_broadening_tail(tails))
        if molecule is None:
            molecule = int(cols["molecule"][0])
        if species is None:
            species = HITRAN_MOLECULES.get(molecule, f"M{molecule}")
        keep = cols["molecule"] == molecule  # files may mix molecules: keep one absorber
        if wavenumber_range is not None:
            keep &= (cols["wavenumber"] >= wavenumber_range[0]) & (cols["wavenumber"] < wavenumber_range[1])
        isos = np.unique(cols["isotopologue"][keep])
        for iso in isos:
            if wanted is not None and int(iso) not in wanted:
                continue
            sel = keep & (cols["isotopologue"] == iso)
            mol = int(cols["molecule"][sel][0])
            yield _make_linelist(cols, sel, species, mol, int(iso), partition, mass_amu, q_cache, path)


def _resolve_partition(partition, species: str, iso: int, cache: dict):
    if iso in cache:
        return cache[iso]
    p = partition.get(iso) if isinstance(partition, dict) else partition
    if p is None:
        func = get_partition_function(species, iso)
    elif callable(p):
        func = p
    else:
        func = read_partition_file(p)
    cache[iso] = func
    return func


def _make_linelist(cols, sel, species, mol, iso, partition, mass_amu, q_cache, path) -> LineList:
    mass, abundance = HITRAN_ISOTOPOLOGUES.get((mol, iso), (MASS_AMU.get(species, np.nan), 1.0))
    mass = mass_amu if mass_amu is not None else mass
    if not np.isfinite(mass):
        raise InputFileError(f"{path}: no mass known for HITRAN molecule {mol} isotopologue {iso}; pass mass_amu")
    kw = {}
    for gas in ("h2", "he"):
        for par in ("gamma", "n"):
            key = f"{par}_{gas}"
            if key in cols:
                v = cols[key][sel]
                fallback = cols.get(f"{par}_air")
                if fallback is not None:
                    v = np.where(np.isfinite(v), v, fallback[sel])
                kw[key] = _fill_default(v, gas, par)
            elif f"{par}_air" in cols:
                kw[key] = cols[f"{par}_air"][sel]
    return LineList(species=species, wavenumber_cm=cols["wavenumber"][sel], e_lower_cm=cols["e_lower"][sel],
                    mass_amu=float(mass), partition=_resolve_partition(partition, species, iso, q_cache),
                    strength_ref=cols["strength"][sel], t_ref=296.0, isotopologue_abundance=float(abundance),
                    abundance_weighted=True, isotopologue=f"{mol}/{iso}", **kw)


def _fill_default(values: np.ndarray, gas: str, par: str) -> np.ndarray:
    from .linelist import DEFAULT_BROADENING

    default = DEFAULT_BROADENING["H2" if gas == "h2" else "He"][0 if par == "gamma" else 1]
    return np.where(np.isfinite(values), values, default)
