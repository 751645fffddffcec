"""Reader for HITRAN collision-induced absorption (CIA) files and their reduction to model bins.

Format (Richard et al. 2012, JQSRT 113, 1276, Table 1): blocks, each a header
line — pair (A20), ν_min, ν_max (F10.4), number of points (I7), T (F7.1),
max value (E10.3), resolution, comments, reference — followed by that many
rows "ν  k" (cm⁻¹, cm⁵ molecule⁻²).  A file may hold several spectral ranges,
each with its own set of temperatures.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from ..errors import InputFileError
from ..opacity.table import LOG10_FLOOR, OpacityTable
from .grid import BuildGrid


def read_cia(path: str | os.PathLike) -> tuple[str, list[dict]]:
    """Parse a HITRAN ``.cia`` file.

    Returns
    -------
    pair : str
        e.g. ``"H2-H2"``.
    blocks : list of dict
        ``{"temperature_K", "wavenumber_cm" (ascending), "value"}`` per block.
    """
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: CIA file not found")
    lines = path.read_text(errors="replace").splitlines()
    blocks, pair, i = [], None, 0
    while i < len(lines):
        parts = lines[i].split()
        if not parts:
            i += 1
            continue
        try:
            n_pts, temp = int(parts[3]), float(parts[4])
            float(parts[1]), float(parts[2])
        except (ValueError, IndexError):
            raise InputFileError(f"{path}: line {i + 1} is not a CIA block header "
                                 "(pair, ν_min, ν_max, n_points, T, ...)") from None
        pair = pair or parts[0]
        rows = lines[i + 1:i + 1 + n_pts]
        if len(rows) < n_pts:
            raise InputFileError(f"{path}: block at line {i + 1} announces {n_pts} rows, file ends after {len(rows)}")
        try:
            data = np.array([r.split()[:2] for r in rows], dtype=np.float64)
        except ValueError:
            raise InputFileError(f"{path}: unreadable data row in block starting at line {i + 1}") from None
        order = np.argsort(data[:, 0])
        blocks.append({"temperature_K": temp, "wavenumber_cm": data[order, 0],
                       "value": np.maximum(data[order, 1], 0.0)})
        i += 1 + n_pts
    if not blocks:
        raise InputFileError(f"{path}: no CIA blocks found")
    return pair, blocks


def _group_by_range(blocks: list[dict]) -> list[list[dict]]:
    """Blocks sharing a spectral range (same first/last wavenumber), each list sorted by T."""
    groups: dict[tuple, list] = {}
    for b in blocks:
        key = (round(float(b["wavenumber_cm"][0]), 3), round(float(b["wavenumber_cm"][-1]), 3))
        groups.setdefault(key, []).append(b)
    return [sorted(g, key=lambda b: b["temperature_K"]) for g in groups.values()]


def _bin_average(nu, k, edges_um, sub: int = 32) -> np.ndarray:
    """Average of linearly interpolated k over each wavelength bin (0 outside the data)."""
    lo, hi = edges_um[:-1], edges_um[1:]
    frac = (np.arange(sub) + 0.5) / sub
    lam = lo[:, None] + (hi - lo)[:, None] * frac[None, :]
    vals = np.interp(1e4 / lam, nu, k, left=0.0, right=0.0)
    return vals.mean(axis=1)


def cia_table(path: str | os.PathLike, grid: BuildGrid, provenance: dict | None = None) -> OpacityTable:
    """A ``cia`` OpacityTable on the grid's constant-R bins.

    For each temperature (union over the file's blocks) and each spectral range, the
    range's block at that T is bin-averaged; a range lacking that T is interpolated
    linearly in T between its neighbouring temperatures (held at the end values
    outside its T range).
    """
    pair, blocks = read_cia(path)
    edges = grid.output_edges()
    temps = np.unique([b["temperature_K"] for b in blocks])
    total = np.zeros((temps.size, edges.size - 1))
    for group in _group_by_range(blocks):
        t_g = np.array([b["temperature_K"] for b in group])
        binned = np.array([_bin_average(b["wavenumber_cm"], b["value"], edges) for b in group])
        for i, t in enumerate(temps):
            j = np.searchsorted(t_g, t)
            if j < t_g.size and t_g[j] == t:
                total[i] += binned[j]
            elif j == 0:
                total[i] += binned[0]
            elif j == t_g.size:
                total[i] += binned[-1]
            else:
                w = (t - t_g[j - 1]) / (t_g[j] - t_g[j - 1])
                total[i] += (1 - w) * binned[j - 1] + w * binned[j]
    log10 = np.log10(np.maximum(total, 10.0 ** LOG10_FLOOR)).astype(np.float32)
    prov = dict(provenance or {})
    prov.setdefault("parameters", {}).update(wavelength_range_um=list(grid.wavelength_range_um),
                                             resolving_power=grid.resolving_power, kind="cia")
    return OpacityTable(kind="cia", species=pair, wavelength_um=grid.output_wavelengths(),
                        wavelength_edges_um=edges, temperature_K=temps, log10_value=log10, provenance=prov)
