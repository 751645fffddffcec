"""The end-to-end demo: simulate → fit → identify → figures → report on the invented scenario.

What ``retrieve demo`` runs (see :mod:`retrieve.demo.scenario` for the
scenario).  Output layout::

    OUT/
      demo.json                   what was run, where everything went, truth recovery
      scenario/                   simulation and fit configurations, simulated spectra (truths in metadata)
      runs/kessavar_<x>/          run folder of each companion (retrieve fit), with
        figures/*.png               corner, spectrum, profile, abundances
        report.html                 the self-contained report
      band_diagram.png            water vs methane indices of both companions' simulated spectra
      indices.ecsv                the index values and errors plotted there

An existing ``OUT`` is never replaced unless ``overwrite`` is given, and
even then only if it holds a ``demo.json`` (so a wrong ``--out`` cannot
delete someone's data).
"""
from __future__ import annotations

import contextlib
import dataclasses
import json
import os
import shutil
import time
import warnings
from pathlib import Path

from ..errors import UserError
from . import scenario as sc

MARKER = "demo.json"


@dataclasses.dataclass
class CompanionResult:
    """Where one companion's products went and how well its truths were recovered."""

    key: str
    name: str
    spectrum: Path
    photometry: Path
    run_dir: Path
    report: Path
    figures: list
    recovery: dict          # parameter -> {"truth", "p2_5", "p97_5", "inside"}
    converged: bool
    identified: bool
    fit_seconds: float


@dataclasses.dataclass
class DemoResult:
    out: Path
    quick: bool
    companions: list
    band_diagram: Path | None
    indices: Path | None
    notes: list
    elapsed_s: float


@contextlib.contextmanager
def _quiet(quick: bool):
    """Silence the warnings a deliberately short chain is expected to raise (the demo says so itself).

    Only with ``quick``: "chain did not converge" and floating-point overflow
    inside the optimiser's convergence test on its 1e300 stand-ins for −∞.
    """
    with warnings.catch_warnings():
        if quick:
            warnings.filterwarnings("ignore", message="chain did not converge", category=RuntimeWarning)
            warnings.filterwarnings("ignore", message="overflow encountered", category=RuntimeWarning)
        yield


def prepare_output(out, overwrite: bool) -> Path:
    """Create ``out``; refuse an existing non-empty folder unless ``overwrite`` and it is a demo folder."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise UserError(f"{out}: exists and is not a folder; choose another --out")
    if out.is_dir() and any(out.iterdir()):
        if not overwrite:
            raise UserError(f"{out}: exists and is not empty; pass --overwrite to replace it or choose another --out")
        if not (out / MARKER).is_file():
            raise UserError(f"{out}: is not a demo output folder (no {MARKER}); refusing to overwrite it")
        shutil.rmtree(out)
    out.mkdir(parents=True, exist_ok=True)
    return out


def truth_recovery(summary, truths: dict, names) -> dict:
    """For each name: truth, 95 % interval from the summary table, and whether the truth is inside."""
    rows = {str(r["name"]): r for r in summary}
    out = {}
    for name in names:
        if name not in rows or name not in truths:
            continue
        r = rows[name]
        lo, hi = float(r["p2_5"]), float(r["p97_5"])
        out[name] = {"truth": float(truths[name]), "median": float(r["median"]), "p2_5": lo, "p97_5": hi,
                     "inside": bool(lo <= truths[name] <= hi)}
    return out


#: Molecules tested by the identification step with ``--quick`` (two reduced fits, run in parallel on
#: the two workers, instead of three).
QUICK_IDENTIFY = ("H2O", "CH4")


def _identify(run_dir: Path, quick: bool, workers: int, settings):
    """Run the identification step if the module exists; returns (done, note)."""
    try:
        from ..analysis.identify import identify
    except ImportError:
        return False, "identification step skipped: retrieve.analysis.identify is not available in this version"
    if quick:
        identify(run_dir, workers=workers, molecules=list(QUICK_IDENTIFY), max_steps=settings.max_steps // 4)
        return True, (f"--quick: identification tested {', '.join(QUICK_IDENTIFY)} only, with reduced fits of "
                      f"at most {settings.max_steps // 4} steps")
    identify(run_dir, workers=workers)
    return True, ""


#: Spectral indices on the axes of the band-depth diagram (Burgasser et al. 2006 definitions,
#: as implemented in :mod:`retrieve.analysis.indices`).
DIAGRAM_INDICES = ("h2o_j", "ch4_h")


def _band_diagram(spectra: dict, out: Path):
    """Water vs methane index diagram of the companions' data (needs the spectral-indices module)."""
    try:
        from ..analysis.indices import index_table
    except ImportError:
        return None, None, "band diagram skipped: retrieve.analysis.indices is not available in this version"
    from ..observations.readers import read_dataset
    from ..observations.writers import atomic_write_text
    from ..plotting import plot_band_diagram, save_figure
    from ..plotting.style import close

    table = index_table([read_dataset(path) for path in spectra.values()])
    table["name"] = list(spectra)
    x, y = DIAGRAM_INDICES
    fig = plot_band_diagram(table, x=x, y=y, x_label=r"H$_2$O-J index", y_label=r"CH$_4$-H index")
    path = save_figure(fig, out / "band_diagram.png")
    close(fig)
    import io
    buf = io.StringIO()
    table.write(buf, format="ascii.ecsv")
    atomic_write_text(out / "indices.ecsv", buf.getvalue(), overwrite=True)
    return path, out / "indices.ecsv", ""


def run_demo(out="demo-output", quick: bool = False, overwrite: bool = False, workers: int | None = None,
             companions=None, echo=print) -> DemoResult:
    """Run the whole demo and return where everything went.

    Parameters
    ----------
    out : path-like
        Output folder (must not exist or be empty, unless ``overwrite``).
    quick : bool
        Coarser model and short chains (:data:`retrieve.demo.scenario.QUICK`);
        otherwise :data:`retrieve.demo.scenario.FULL`.
    overwrite : bool
        Replace an earlier demo output in ``out``.
    workers : int, optional
        Processes per fit (default: up to 2, the CPU count if smaller).
    companions : sequence of str, optional
        Keys of the companions to fit (default: all, or
        :data:`retrieve.demo.scenario.QUICK_COMPANIONS` with ``quick``); all are simulated.
    echo : callable
        Progress messages (``print`` by default).
    """
    from ..inference import fit, load_run
    from ..plotting.run_figures import FIGURES, simulation_truths, write_run_figures
    from ..report.build import build_report
    from ..simulate import load_and_simulate, write_simulation

    t0 = time.time()
    settings = sc.QUICK if quick else sc.FULL
    if companions is None:
        companions = sc.QUICK_COMPANIONS if quick else [c.key for c in sc.COMPANIONS]
    unknown = set(companions) - {c.key for c in sc.COMPANIONS}
    if unknown or not companions:
        raise UserError(f"--companions: unknown {sorted(unknown) or 'none given'}; choose from "
                        f"{', '.join(c.key for c in sc.COMPANIONS)}")
    chosen = [c for c in sc.COMPANIONS if c.key in companions]
    workers = int(workers or min(2, os.cpu_count() or 1))
    out = prepare_output(out, overwrite)
    (out / MARKER).write_text(json.dumps({"status": "running", "quick": quick}) + "\n")
    echo(f"demo: {sc.STAR['name']} (invented star) with {len(sc.COMPANIONS)} companions; fitting "
         f"{', '.join(c.name for c in chosen)} with {'quick' if quick else 'full'} settings; output in {out}")
    paths = sc.write_scenario(out / "scenario", settings)
    for comp in sc.COMPANIONS:  # simulating is cheap: always all companions (the band diagram uses them)
        p = paths[comp.key]
        echo(f"[{comp.name}] simulate {p['simulate'].name} -> {p['spectrum'].name}, {p['photometry'].name}")
        write_simulation(load_and_simulate(p["simulate"]), p["spectrum"],
                         settings_meta={"config": str(p["simulate"])})
    results, notes = [], []
    for comp in chosen:
        p = paths[comp.key]
        run_dir = out / "runs" / comp.slug
        echo(f"[{comp.name}] fit ({settings.walkers} walkers, up to {settings.max_steps} steps, "
             f"{workers} worker(s))")
        t_fit = time.time()
        with _quiet(quick):
            res = fit(p["fit"], out_dir=run_dir, workers=workers, progress=False)
        fit_s = time.time() - t_fit
        echo(f"[{comp.name}]   {'converged' if res.converged else 'not converged (short chain)'} after "
             f"{res.n_steps} steps in {fit_s:.0f} s")
        with _quiet(quick):
            identified, note = _identify(run_dir, quick, workers, settings)
        if identified:
            echo(f"[{comp.name}] identify: {run_dir / 'detections.ecsv'}, {run_dir / 'bands.ecsv'}")
        if note and note not in notes:
            notes.append(note)
            echo(f"[{comp.name}] {note}")
        run = load_run(run_dir)
        figures = write_run_figures(run, FIGURES, "png")
        report = build_report(run_dir)
        recovery = truth_recovery(run.summary, simulation_truths(run.object_data), comp.main_parameters)
        results.append(CompanionResult(comp.key, comp.name, p["spectrum"], p["photometry"], run_dir, report,
                                       figures, recovery, res.converged, identified, fit_s))
        inside = sum(v["inside"] for v in recovery.values())
        echo(f"[{comp.name}] report {report}; truths inside 95 % intervals: {inside}/{len(recovery)}")
    spectra = {c.name: paths[c.key]["spectrum"] for c in sc.COMPANIONS}
    diagram, indices, note = _band_diagram(spectra, out)
    if note:
        notes.append(note)
        echo(note)
    result = DemoResult(out, quick, results, diagram, indices, notes, time.time() - t0)
    (out / MARKER).write_text(json.dumps(_as_json(result), indent=2) + "\n")
    _print_summary(result, echo)
    return result


def _as_json(result: DemoResult) -> dict:
    return {"status": "finished", "quick": result.quick, "elapsed_s": result.elapsed_s, "notes": result.notes,
            "band_diagram": str(result.band_diagram) if result.band_diagram else None,
            "indices": str(result.indices) if result.indices else None,
            "companions": [{"key": c.key, "name": c.name, "spectrum": str(c.spectrum), "photometry": str(c.photometry),
                            "run_dir": str(c.run_dir), "report": str(c.report), "figures": [str(f) for f in c.figures],
                            "converged": c.converged, "identified": c.identified, "fit_seconds": c.fit_seconds,
                            "recovery": c.recovery} for c in result.companions]}


def _print_summary(result: DemoResult, echo) -> None:
    echo("")
    echo(f"demo finished in {result.elapsed_s:.0f} s; everything is in {result.out}")
    for c in result.companions:
        echo(f"  {c.name}:")
        echo(f"    simulated data  {c.spectrum}, {c.photometry}")
        echo(f"    run folder      {c.run_dir}")
        echo(f"    figures         {', '.join(str(Path(f).name) for f in c.figures)} in {Path(c.figures[0]).parent}")
        echo(f"    report          {c.report}")
        for name, v in c.recovery.items():
            echo(f"    {name:<14s} truth {v['truth']:<8g} 95% [{v['p2_5']:.4g}, {v['p97_5']:.4g}] "
                 f"{'inside' if v['inside'] else 'OUTSIDE'}")
    if result.band_diagram:
        echo(f"  band diagram    {result.band_diagram} (indices: {result.indices})")
    for note in result.notes:
        echo(f"  note: {note}")
    if result.quick:
        echo("  (--quick: coarse model and short, unconverged chains; run without --quick for the full settings)")
