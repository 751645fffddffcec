"""Which generator makes which bundled table, the bundled grid, and :func:`build_all`.

Reproducibility: every table is a deterministic function of this package's
code and constants — sorted inputs, no random numbers, a fixed provenance
date (:data:`BUILD_DATE`), and one bin-average code path
(:mod:`.binning`) whose per-bin sums run in a fixed line order, so a slice of
the grid recomputes to the same float32 values as the full table.
"""
from __future__ import annotations

import importlib
import logging
import os
import time
from pathlib import Path

import numpy as np

from ... import __version__
from ...errors import UserError
from ...opacity.table import LOG10_FLOOR, OpacityTable, write_table
from ..grid import BuildGrid

log = logging.getLogger(__name__)

#: Provenance date of the bundled tables (fixed so rebuilding gives identical files).
BUILD_DATE = "2026-12-02"

#: Temperature axis of the bundled tables, K.
BUNDLED_TEMPERATURES_K = (300.0, 350.0, 400.0, 500.0, 600.0, 700.0, 800.0, 1000.0, 1200.0, 1400.0,
                          1700.0, 2000.0, 2500.0, 3000.0)
#: Pressure axis, bar: one point per decade, 1e-5 to 1e2.
BUNDLED_PRESSURES_BAR = tuple(float(10.0 ** k) for k in range(-5, 3))

# kind "lines": module.line_list() -> LineList(s), binned by .binning
# kind "profile": module.cross_section(edges_um, T, P, **kwargs) -> (n_P, n_T, n_w) σ
# kind "cia": module.cia_coefficient(pair, wavelength_um, T) -> (n_T, n_w) cm^5
GENERATORS = {
    "CO": {"kind": "lines", "module": "co", "partition": ("co", {})},
    "CO2": {"kind": "lines", "module": "co2", "partition": ("co2", {})},
    "H2O": {"kind": "lines", "module": "h2o", "partition": ("h2o", {})},
    "CH4": {"kind": "lines", "module": "ch4", "partition": ("ch4", {})},
    "NH3": {"kind": "lines", "module": "nh3", "partition": ("nh3", {})},
    "K": {"kind": "profile", "module": "alkali", "kwargs": {"element": "K"},
          "partition": ("alkali", {"element": "K"})},
    "Na": {"kind": "profile", "module": "alkali", "kwargs": {"element": "Na"},
           "partition": ("alkali", {"element": "Na"})},
    "H2-H2": {"kind": "cia", "module": "cia_model", "partition": None},
    "H2-He": {"kind": "cia", "module": "cia_model", "partition": None},
}
XSEC_SPECIES = tuple(k for k, v in GENERATORS.items() if v["kind"] != "cia")
CIA_PAIRS = tuple(k for k, v in GENERATORS.items() if v["kind"] == "cia")


def bundled_grid() -> BuildGrid:
    """The grid of the bundled tables: 0.8–5 µm at R = 1000, 14 T × 8 P."""
    return BuildGrid(wavelength_range_um=(0.8, 5.0), resolving_power=1000.0,
                     temperatures_K=BUNDLED_TEMPERATURES_K, pressures_bar=BUNDLED_PRESSURES_BAR,
                     wing_cutoff_cm=25.0)


def table_filename(species: str) -> str:
    """File name per DEVELOPERS.md: ``<species>.xsec.h5`` or ``<pair>.cia.h5``."""
    return f"{species}.cia.h5" if GENERATORS[species]["kind"] == "cia" else f"{species}.xsec.h5"


def _module(name: str):
    return importlib.import_module(f"{__package__}.{name}")


def _sources(mod) -> str:
    """The generator's statement of method and sources (its module docstring)."""
    return (mod.__doc__ or "").strip()


def _select_grid(grid: BuildGrid, slice_spec: dict | None):
    """Edges, centres, T and P of the (possibly sliced) bundled grid."""
    edges = grid.output_edges()
    temps = np.array(grid.temperatures_K)
    press = np.array(grid.pressures_bar)
    w_idx = np.arange(edges.size - 1)
    if slice_spec:
        unknown = set(slice_spec) - {"temperature_K", "pressure_bar", "wavelength_um"}
        if unknown:
            raise UserError(f"build_all: unknown slice key(s) {sorted(unknown)}; "
                            "use temperature_K, pressure_bar, wavelength_um")
        if "temperature_K" in slice_spec:
            temps = _members(temps, slice_spec["temperature_K"], "temperature_K")
        if "pressure_bar" in slice_spec:
            press = _members(press, slice_spec["pressure_bar"], "pressure_bar")
        if "wavelength_um" in slice_spec:
            lo, hi = slice_spec["wavelength_um"]
            centres = np.sqrt(edges[:-1] * edges[1:])
            w_idx = np.nonzero((centres >= lo) & (centres <= hi))[0]
            if w_idx.size == 0:
                raise UserError(f"build_all: slice wavelength_um {lo}-{hi} contains no bin")
    sub_edges = edges[w_idx[0]:w_idx[-1] + 2]
    return sub_edges, np.sqrt(sub_edges[:-1] * sub_edges[1:]), temps, press


def _members(axis: np.ndarray, values, name: str) -> np.ndarray:
    values = np.atleast_1d(np.asarray(values, dtype=np.float64))
    for v in values:
        if not np.any(axis == v):
            raise UserError(f"build_all: slice {name}={v:g} is not on the bundled grid {list(axis)}")
    return np.sort(values)


def _log10(values: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return np.maximum(np.log10(values), LOG10_FLOOR).astype(np.float32)


def compute_table(species: str, grid: BuildGrid | None = None, slice_spec: dict | None = None) -> OpacityTable:
    """Compute one bundled table (or a slice of it) in memory."""
    if species not in GENERATORS:
        raise UserError(f"build_all: unknown built-in species {species!r}; choose from {sorted(GENERATORS)}")
    grid = bundled_grid() if grid is None else grid
    spec = GENERATORS[species]
    mod = _module(spec["module"])
    edges, centres, temps, press = _select_grid(grid, slice_spec)
    # same keys as retrieve.opacity_build.provenance.make_provenance (no platform entry: the
    # record must not depend on the machine), plus the generator and its statement of sources
    provenance = {"software": "retrieve", "version": __version__, "date": BUILD_DATE, "inputs": [],
                  "generator": mod.__name__, "method_and_sources": _sources(mod),
                  "parameters": {"wavelength_range_um": list(grid.wavelength_range_um),
                                 "resolving_power": grid.resolving_power, "bin_average": True}}
    if spec["kind"] == "cia":
        value = mod.cia_coefficient(species, centres, temps, edges_um=edges)
        return OpacityTable(kind="cia", species=species, wavelength_um=centres, temperature_K=temps,
                            log10_value=_log10(value), wavelength_edges_um=edges, provenance=provenance)
    if spec["kind"] == "lines":
        from .binning import bin_average_cross_section
        source = mod.line_list()
        chunks = [source] if hasattr(source, "wavenumber_cm") else list(source)
        provenance["parameters"].update(wing_cutoff_cm=grid.wing_cutoff_cm, profile="pseudo-Voigt CDF bin average",
                                  n_lines=int(sum(len(c) for c in chunks)))
        sigma = bin_average_cross_section(chunks, edges, temps, press, cutoff_cm=grid.wing_cutoff_cm)
    else:
        sigma = mod.cross_section(edges, temps, press, **spec.get("kwargs", {}))
    return OpacityTable(kind="cross_section", species=species, wavelength_um=centres, temperature_K=temps,
                        pressure_bar=press, log10_value=_log10(sigma), wavelength_edges_um=edges,
                        provenance=provenance)


def build_all(out_dir: str | os.PathLike, species=None, slice=None, skip_missing: bool = True) -> dict:
    """Generate the bundled opacity tables into ``out_dir``.

    Parameters
    ----------
    out_dir : path-like
        Created if absent; files are named by :func:`table_filename`.
    species : sequence of str or None
        Subset of :data:`GENERATORS` (default: all).
    slice : dict or None
        Rebuild only part of the grid, for checks: keys ``temperature_K`` and
        ``pressure_bar`` (values that lie on the bundled axes) and
        ``wavelength_um`` ((low, high): bins whose centres fall inside).
    skip_missing : bool
        Skip (with a log message) generators whose module is not importable.

    Returns
    -------
    dict
        species -> written path.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    names = sorted(GENERATORS) if species is None else list(species)
    written = {}
    for name in names:
        if name not in GENERATORS:
            raise UserError(f"build_all: unknown built-in species {name!r}; choose from {sorted(GENERATORS)}")
        try:
            _module(GENERATORS[name]["module"])
        except ModuleNotFoundError as exc:
            if skip_missing and species is None:
                log.warning("skipping %s: generator not available (%s)", name, exc)
                continue
            raise
        start = time.perf_counter()
        table = compute_table(name, slice_spec=slice)
        written[name] = write_table(table, out_dir / table_filename(name))
        log.info("built %s in %.1f s", written[name], time.perf_counter() - start)
    return written
