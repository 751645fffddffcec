"""Reader for ExoMol line lists: ``.def``, ``.states``, ``.trans``, ``.pf``, ``.broad``.

File layout (Tennyson et al. 2016, J. Mol. Spectrosc. 327, 73, sec. 4;
ExoMol format as documented with the database):

* ``<iso-slug>__<dataset>.def`` — "value  # description" lines; read here:
  iso-slug, dataset name, isotopologue mass (Da); the default Lorentz HWHM
  and exponent are returned by :func:`read_def` for information only (they
  refer to air), lines without ``.broad`` data get :data:`DEFAULT_BROADENING`.
* ``.states`` — whitespace columns: state ID, energy (cm⁻¹), total
  degeneracy g, J, then optional columns (not used).
* ``.trans`` (one file, or several split by wavenumber range; plain or
  bz2) — upper ID, lower ID, Einstein A (s⁻¹), optional wavenumber.
* ``.pf`` — two columns T, Q.
* ``__H2.broad`` / ``__He.broad`` — rows "code γ n J''"; code ``a0`` gives
  γ, n as a function of the lower-state J''.  Other codes are skipped; J''
  beyond the table take the last row's values.
"""
from __future__ import annotations

import bz2
import os
import re
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from .linelist import DEFAULT_BROADENING, LineList
from .partition import read_partition_file


def _open_text(path: Path):
    return bz2.open(path, "rb") if path.suffix == ".bz2" else open(path, "rb")


def read_def(path: str | os.PathLike) -> dict:
    """The fields of an ExoMol ``.def`` file that the builder uses.

    Returns dict with ``iso_slug``, ``dataset``, ``mass_amu``, ``gamma_default``, ``n_default``
    (missing entries are None).
    """
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: ExoMol .def file not found")
    out = {"iso_slug": None, "dataset": None, "mass_amu": None, "gamma_default": None, "n_default": None}
    for raw in path.read_text(errors="replace").splitlines():
        if "#" not in raw:
            continue
        value, desc = raw.split("#", 1)
        value, desc = value.strip(), desc.strip().lower()
        first = value.split()[0] if value.split() else ""
        if desc.startswith("iso-slug") or desc.startswith("iso slug"):
            out["iso_slug"] = first
        elif desc.startswith("isotopologue dataset name"):
            out["dataset"] = first
        elif desc.startswith("isotopologue mass"):
            out["mass_amu"] = _to_float(first, path, desc)
        elif desc.startswith("default value of lorentzian half-width"):
            out["gamma_default"] = _to_float(first, path, desc)
        elif desc.startswith("default value of temperature exponent"):
            out["n_default"] = _to_float(first, path, desc)
    stem = path.name[:-len(".def")] if path.name.endswith(".def") else path.stem
    if "__" in stem:
        slug, dataset = stem.split("__", 1)
        out["iso_slug"] = out["iso_slug"] or slug
        out["dataset"] = out["dataset"] or dataset
    if out["mass_amu"] is None:
        raise InputFileError(f"{path}: no 'Isotopologue mass' line; is this an ExoMol .def file?")
    return out


def _to_float(text: str, path: Path, desc: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise InputFileError(f"{path}: cannot read a number for '{desc}' (got {text!r})") from None


def _find(folder: Path, stem: str, suffix: str) -> list[Path]:
    return sorted(p for p in folder.glob(f"{stem}*{suffix}*") if re.search(re.escape(suffix) + r"(\.bz2)?$", p.name))


def read_states(path: str | os.PathLike) -> dict:
    """States table: dict with ``energy`` and ``g`` and ``j`` arrays indexed by state ID (NaN where absent)."""
    path = Path(path)
    try:
        with _open_text(path) as fh:
            # only the first four columns are numeric in every file
            data = np.loadtxt(fh, usecols=(0, 1, 2, 3), ndmin=2)
    except (ValueError, IndexError) as exc:
        raise InputFileError(f"{path}: .states rows need numeric ID, E, g, J in the first four columns ({exc})") from None
    ids = data[:, 0].astype(np.int64)
    size = ids.max() + 1
    out = {k: np.full(size, np.nan) for k in ("energy", "g", "j")}
    out["energy"][ids], out["g"][ids], out["j"][ids] = data[:, 1], data[:, 2], data[:, 3]
    return out


def read_broad(path: str | os.PathLike):
    """``a0`` rows of an ExoMol ``.broad`` file -> (J'' array, γ array, n array) sorted by J''."""
    path = Path(path)
    js, gs, ns = [], [], []
    for ln in path.read_text(errors="replace").splitlines():
        parts = ln.split()
        if len(parts) >= 4 and parts[0].lower() == "a0":
            try:
                gs.append(float(parts[1])), ns.append(float(parts[2])), js.append(float(parts[3]))
            except ValueError:
                raise InputFileError(f"{path}: cannot read row {ln.strip()!r}") from None
    if not js:
        raise InputFileError(f"{path}: no 'a0' rows (J''-dependent broadening) found")
    order = np.argsort(js)
    return np.array(js)[order], np.array(gs)[order], np.array(ns)[order]


def _broad_lookup(table, j_lower: np.ndarray):
    js, gs, ns = table
    idx = np.clip(np.searchsorted(js, j_lower, side="left"), 0, js.size - 1)
    return gs[idx], ns[idx]


def _iter_trans(paths: list[Path], chunk_lines: int) -> Iterator[np.ndarray]:
    """Rows of .trans files as float arrays (n, 3 or 4), in chunks."""
    for path in paths:
        with _open_text(path) as fh:
            first = fh.readline()
            if not first:
                continue
            ncol = len(first.split())
            pending = first
            while True:
                data = fh.read(chunk_lines * 40)
                buf = pending + data
                if data:
                    cut = buf.rfind(b"\n") + 1
                    buf, pending = buf[:cut], buf[cut:]
                else:
                    pending = b""
                if buf.strip():
                    vals = np.array(buf.split(), dtype=np.float64)
                    if vals.size % ncol:
                        raise InputFileError(f"{path}: rows do not all have {ncol} columns")
                    yield vals.reshape(-1, ncol)
                if not data:
                    break


def read_exomol(def_path: str | os.PathLike, species: str | None = None, partition=None,
                broadening: dict | None = None, wavenumber_range=None, isotopologue_abundance: float = 1.0,
                chunk_lines: int = 2_000_000) -> Iterator[LineList]:
    """Stream an ExoMol line list as LineList chunks.

    Parameters
    ----------
    def_path : path-like
        The ``.def`` file; ``.states``, ``.trans``, ``.pf`` and ``.broad`` files are
        looked up beside it by iso-slug and dataset name.
    species : str or None
        Absorber name (default: the iso-slug with mass numbers removed, ``12C-16O`` -> ``CO``).
    partition : callable, path or None
        Q(T); default the ``.pf`` file beside the ``.def``.
    broadening : dict or None
        {"H2": path, "He": path} of ``.broad`` files; default ``<slug>__H2.broad`` /
        ``<slug>__He.broad`` if present, else :data:`DEFAULT_BROADENING`.
    isotopologue_abundance : float
        Multiplies the strengths (ExoMol strengths are per molecule of the isotopologue).
    """
    def_path = Path(def_path)
    info = read_def(def_path)
    folder, slug, dataset = def_path.parent, info["iso_slug"], info["dataset"]
    stem = f"{slug}__{dataset}"
    species = species or _species_from_slug(slug)
    states_files = _find(folder, stem, ".states")
    trans_files = _find(folder, stem, ".trans")
    if not states_files or not trans_files:
        raise InputFileError(f"{def_path}: no {stem}.states or {stem}*.trans files beside the .def file")
    if partition is None:
        pf = _find(folder, stem, ".pf")
        if not pf:
            raise InputFileError(f"{def_path}: no {stem}.pf partition-function file; pass a partition function")
        partition = read_partition_file(pf[0])
    elif not callable(partition):
        partition = read_partition_file(partition)
    if broadening is None:
        broadening = {gas: p for gas in ("H2", "He") for p in _find(folder, f"{slug}__{gas}", ".broad")[:1]}
    broad_tables = {gas: read_broad(p) for gas, p in broadening.items()}
    states = read_states(states_files[0])
    for rows in _iter_trans(trans_files, chunk_lines):
        yield _trans_to_linelist(rows, states, info, species, partition, broad_tables, wavenumber_range,
                                 isotopologue_abundance, slug, trans_files[0])


def _species_from_slug(slug: str) -> str:
    """``12C-16O`` -> ``CO``; ``1H2-16O`` -> ``H2O`` (mass numbers dropped, parts joined)."""
    return "".join(re.sub(r"^\d+", "", part) for part in slug.split("-"))


def _trans_to_linelist(rows, states, info, species, partition, broad_tables, wavenumber_range,
                       abundance, slug, where) -> LineList:
    up, lo = rows[:, 0].astype(np.int64), rows[:, 1].astype(np.int64)
    n_states = states["energy"].size
    if up.max() >= n_states or lo.max() >= n_states:
        raise InputFileError(f"{where}: transition refers to a state ID beyond the .states file")
    e_up, e_lo = states["energy"][up], states["energy"][lo]
    nu = rows[:, 3] if rows.shape[1] >= 4 else e_up - e_lo
    keep = np.isfinite(e_up) & np.isfinite(e_lo) & (nu > 0)
    if wavenumber_range is not None:
        keep &= (nu >= wavenumber_range[0]) & (nu < wavenumber_range[1])
    up, lo, nu, e_lo, a = up[keep], lo[keep], nu[keep], e_lo[keep], rows[keep, 2]
    kw = {}
    j_lower = states["j"][lo]
    for gas, table in broad_tables.items():
        g, n = _broad_lookup(table, j_lower)
        kw[f"gamma_{gas.lower()}"], kw[f"n_{gas.lower()}"] = g, n
    for gas in ("H2", "He"):
        if gas not in broad_tables:
            g0, n0 = DEFAULT_BROADENING[gas]
            kw[f"gamma_{gas.lower()}"], kw[f"n_{gas.lower()}"] = np.full(nu.size, g0), np.full(nu.size, n0)
    return LineList(species=species, wavenumber_cm=nu, e_lower_cm=e_lo, mass_amu=float(info["mass_amu"]),
                    partition=partition, einstein_a=a, g_upper=states["g"][up],
                    isotopologue_abundance=float(abundance), abundance_weighted=False, isotopologue=slug, **kw)
