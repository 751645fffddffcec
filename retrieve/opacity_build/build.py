"""Build opacity tables (cross sections, k-tables) from line lists.

For every (T, P) point of the grid the line source is read (or taken from
memory), lines are put on the fine grid with the discrete integral transform
(:mod:`.dit`), and the fine-grid cross sections are reduced to the
constant-R output bins (:mod:`.reduce`).  Points are independent, so they can
be spread over a process pool (``n_workers``).
"""
from __future__ import annotations

import multiprocessing
import os
from concurrent.futures import ProcessPoolExecutor

import numpy as np

from ..opacity.table import LOG10_FLOOR, OpacityTable
from .dit import FineGridAccumulator
from .grid import BuildGrid
from .linelist import LineList, iter_chunks
from .provenance import make_provenance
from .reduce import bin_index_ranges, bin_mean, bin_sample, k_coefficients

_STATE: dict = {}  # line source and grid of the running build, inherited by forked workers


def _prepare_source(line_source):
    """Sort an in-memory LineList by wavenumber once (the accumulator then sorts cheaply)."""
    if isinstance(line_source, LineList):
        order = np.argsort(line_source.wavenumber_cm, kind="stable")
        return line_source.select(order)
    if callable(line_source):
        return line_source
    # a one-shot iterable must be replayable for every (T, P): keep the chunks, each sorted
    return [c.select(np.argsort(c.wavenumber_cm, kind="stable")) for c in line_source]


def _compute_point(task):
    """Reduced outputs at one (T, P): {kind: array}."""
    i_p, i_t = task
    grid: BuildGrid = _STATE["grid"]
    kinds = _STATE["kinds"]
    acc = FineGridAccumulator(grid, grid.temperatures_K[i_t], grid.pressures_bar[i_p])
    source = _STATE["source"]
    if isinstance(source, LineList):
        acc.add(source, final=True)
    elif isinstance(source, list):
        acc.add_all(source)
    else:
        for chunk in iter_chunks(source):
            acc.add(chunk)
    sigma = acc.finish()
    ranges = _STATE["ranges"]
    out = {}
    if "cross_section" in kinds:
        if grid.reduction == "mean":
            out["cross_section"] = bin_mean(sigma, ranges)
        else:
            out["cross_section"] = bin_sample(acc.nu, sigma, grid.output_wavelengths())
    if "ktable" in kinds:
        out["ktable"] = k_coefficients(sigma, ranges, grid.g_quadrature()[0])
    return i_p, i_t, out


def _to_log10(values: np.ndarray) -> np.ndarray:
    return np.log10(np.maximum(values, 10.0 ** LOG10_FLOOR)).astype(np.float32)


def build_tables(line_source, grid: BuildGrid, species: str, kinds=("cross_section",),
                 provenance: dict | None = None, progress: bool = True, n_workers: int = 1) -> dict:
    """Build several table kinds from one pass over the (T, P) grid.

    Parameters
    ----------
    line_source : LineList, list of LineList, or callable returning an iterator of LineList chunks
        LineLists (one or a list) are held in memory and processed segment by segment;
        a callable is called again for every (T, P) point (streamed: the file is re-read,
        and its lines are binned for the whole spectrum before the convolutions).
    grid : BuildGrid
    species : str
    kinds : iterable of {"cross_section", "ktable"}
    provenance : dict or None
        Recorded in each table (see :func:`retrieve.opacity_build.provenance.make_provenance`);
        the grid parameters and the kind are added.
    progress : bool
        Show a tqdm progress bar with the estimated time remaining.
    n_workers : int
        Processes over (T, P) points (Linux fork; 1 = in this process).

    Returns
    -------
    dict kind -> OpacityTable
    """
    from tqdm import tqdm

    kinds = tuple(kinds)
    bad = set(kinds) - {"cross_section", "ktable"}
    if bad:
        raise ValueError(f"unknown table kind(s) {sorted(bad)}")
    edges = grid.output_edges()
    centres = grid.output_wavelengths()
    n_p, n_t, n_w = len(grid.pressures_bar), len(grid.temperatures_K), centres.size
    g_points, g_weights = grid.g_quadrature()
    _STATE.update(source=_prepare_source(line_source), grid=grid, kinds=kinds,
                  ranges=bin_index_ranges(grid.fine_wavenumbers(), edges))
    results = {"cross_section": np.zeros((n_p, n_t, n_w)), "ktable": np.zeros((n_p, n_t, n_w, grid.n_g))}
    tasks = [(i_p, i_t) for i_t in range(n_t) for i_p in range(n_p)]
    bar = tqdm(total=len(tasks), desc=f"{species} opacity", unit="point", disable=not progress)
    try:
        if n_workers > 1 and len(tasks) > 1:
            ctx = multiprocessing.get_context("fork")
            with ProcessPoolExecutor(max_workers=n_workers, mp_context=ctx) as pool:
                for i_p, i_t, out in pool.map(_compute_point, tasks, chunksize=1):
                    for kind, arr in out.items():
                        results[kind][i_p, i_t] = arr
                    bar.update()
        else:
            for task in tasks:
                i_p, i_t, out = _compute_point(task)
                for kind, arr in out.items():
                    results[kind][i_p, i_t] = arr
                bar.update()
    finally:
        bar.close()
        _STATE.clear()
    prov = dict(provenance) if provenance is not None else make_provenance()
    params = dict(prov.get("parameters", {}))
    params.update(grid.as_dict())
    prov["parameters"] = params
    tables = {}
    for kind in kinds:
        common = dict(kind=kind, species=species, wavelength_um=centres, wavelength_edges_um=edges,
                      temperature_K=np.asarray(grid.temperatures_K), pressure_bar=np.asarray(grid.pressures_bar),
                      log10_value=_to_log10(results[kind]), provenance=dict(prov, kind=kind))
        if kind == "ktable":
            common.update(g_points=g_points, g_weights=g_weights)
        tables[kind] = OpacityTable(**common)
    return tables


def build_cross_section_table(line_source, grid: BuildGrid, species: str, provenance: dict | None = None,
                              progress: bool = True, n_workers: int = 1) -> OpacityTable:
    """A ``cross_section`` table (bin-averaged or sampled σ, see ``BuildGrid.reduction``)."""
    return build_tables(line_source, grid, species, ("cross_section",), provenance, progress,
                        n_workers)["cross_section"]


def build_ktable(line_source, grid: BuildGrid, species: str, provenance: dict | None = None,
                 progress: bool = True, n_workers: int = 1) -> OpacityTable:
    """A ``ktable``: k(g) at ``grid.n_g`` Gauss–Legendre points per constant-R bin."""
    return build_tables(line_source, grid, species, ("ktable",), provenance, progress, n_workers)["ktable"]


def default_workers() -> int:
    """Worker processes to use by default: the CPUs available to this process, at most 2."""
    try:
        return max(1, min(2, len(os.sched_getaffinity(0))))
    except AttributeError:  # pragma: no cover - non-Linux
        return 1
