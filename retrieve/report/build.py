"""Assemble the HTML report of a run folder (what ``retrieve report RUN_DIR`` runs).

Sections: inputs and settings, convergence diagnostics, parameter table
(straight from ``summary.ecsv``), detections and flagged bands (when the
identification step wrote ``detections.ecsv`` / ``bands.ecsv``), every
figure of :data:`retrieve.plotting.run_figures.FIGURES`, and the caveats.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from astropy.table import Table

from .. import __version__
from ..errors import UserError
from ..observations.writers import atomic_write_text
from ..plotting import run_figures
from ..plotting.style import close, figure_to_png_bytes
from .html import STANDARD_CAVEATS, ReportContent, ReportFigure, ReportTable, render_html

REPORT = "report.html"
SUMMARY_COLUMNS = ("name", "median", "p2_5", "p16", "p84", "p97_5", "map")
CAPTIONS = {
    "corner": "Corner plot. One- and two-dimensional marginal posteriors; dashed lines at the 16th, 50th "
              "and 84th percentiles, contours at 1σ and 2σ; truth markers where the input was simulated.",
    "spectrum": "Spectrum. Data with 1σ errors (photometry with filter half-maximum widths), the maximum a "
                "posteriori model, 1σ/2σ posterior-predictive envelopes, residuals in units of σ, and bands "
                "flagged by the identification step.",
    "profile": "Temperature–pressure profile. Posterior median with 1σ/2σ envelopes and, beside it, the "
               "emission contribution function of the maximum a posteriori model per band.",
    "abundances": "Abundance posteriors. One panel per absorber; upper limits shown with an arrow at the "
                  "95th percentile.",
}


def _inputs(run) -> list[tuple[str, str]]:
    m = run.manifest
    rows = [("object", str(m.get("object", ""))), ("run folder", str(Path(run.run_dir).resolve())),
            ("configuration file", str(m.get("config_file")))]
    for d in m.get("datasets", []):
        switches = [k for k in ("scale", "inflate_errors", "correlated_noise") if d.get(k)]
        rows.append((f"data set {d['name']}", f"{d.get('kind', '')}, {d.get('n_points', '?')} points, "
                     f"{d.get('file')}; noise terms: {', '.join(switches) or 'none'}"))
    model = run.config.model_mapping
    rows.append(("model", ", ".join(f"{k} = {v}" for k, v in model.items())))
    for name, prior in m.get("priors", {}).items():
        rows.append((f"prior {name}", ", ".join(f"{k} = {v}" for k, v in prior.items())))
    for name, value in m.get("fixed", {}).items():
        rows.append((f"fixed {name}", f"{value:g}"))
    sampler = m.get("sampler", {})
    rows.append(("sampler", ", ".join(f"{k} = {sampler[k]}" for k in ("walkers", "max_steps", "check_every", "seed",
                                                                       "tau_factor") if k in sampler)))
    for name, table in m.get("opacity_tables", {}).items():
        rows.append((f"opacity table {name}", f"{table.get('path')} (sha256 {str(table.get('checksum'))[:12]}…)"))
    rows.append(("evaluations", f"{m.get('n_evaluations')} ({m.get('evaluations_per_s', math.nan):.1f} per s), "
                 f"wall time {m.get('wall_time_s', math.nan):.0f} s, workers {m.get('workers')}"))
    failures = m.get("evaluation_failures") or {}
    if failures:
        rows.append(("model evaluation failures", ", ".join(f"{k}: {v}" for k, v in failures.items())))
    versions = m.get("versions", {})
    rows.append(("versions", ", ".join(f"{k} {v}" for k, v in versions.items())))
    return rows


def convergence_table(run) -> Table:
    """τ per free parameter and the chain length in units of τ, from the manifest."""
    conv = run.manifest.get("convergence", {})
    tau = np.asarray(conv.get("tau", [math.nan] * len(run.param_names)), dtype=float)
    n_steps = int(conv.get("n_steps", 0))
    return Table({"parameter": run.param_names, "tau_steps": tau,
                  "chain_length_over_tau": n_steps / tau})


def convergence_overview(run) -> Table:
    """One row: converged, steps, walkers, acceptance, burn-in, thin, samples."""
    conv = run.manifest.get("convergence", {})
    keys = ("converged", "n_steps", "n_walkers", "acceptance_fraction", "burn_in", "thin", "n_samples", "tau_factor")
    return Table(rows=[[conv.get(k) for k in keys]], names=keys)


def parameter_table(run, truths: dict) -> Table:
    """The summary file's rows and columns (values untouched), plus the truth where simulated."""
    summary = run.summary
    table = Table({c: summary[c] for c in SUMMARY_COLUMNS if c in summary.colnames})
    if truths:
        table["truth"] = [truths.get(str(n), math.nan) for n in summary["name"]]
        table["truth_in_95"] = [bool(summary["p2_5"][i] <= truths[str(n)] <= summary["p97_5"][i])
                                if str(n) in truths else "" for i, n in enumerate(summary["name"])]
    return table


def _display_table(table: Table) -> Table:
    """Drop columns that cannot be shown in one cell (e.g. per-channel lists)."""
    keep = [c for c in table.colnames if table[c].ndim == 1]
    return table[keep]


def report_content(run, figures=run_figures.FIGURES) -> ReportContent:
    """Everything the report of ``run`` shows (figures rendered to PNG)."""
    truths = run_figures.derived_truths(run_figures.simulation_truths(run.object_data))
    notes = []
    conv = run.manifest.get("convergence", {})
    if not conv.get("converged", False):
        notes.append("The chain did not meet the convergence rule (length > tau_factor × τ and τ stable); "
                     "treat the intervals as indicative and run longer (raise [sampler] max_steps or --resume).")
    pilot = run.manifest.get("pilot") or {}
    if pilot and not pilot.get("method", "").startswith("nested"):
        notes.append(f"The walkers continued from a preliminary {pilot.get('steps', 0)}-step chain "
                     f"({pilot.get('likelihood_calls', 0)} likelihood calls, not part of the posterior sample) "
                     "that started near the optimiser's maximum; like the chain itself it may have missed a "
                     "distant mode (a nested-sampling pilot explores the whole prior: pilot = \"nested\").")
    elif pilot:
        notes.append(f"The walkers started from a nested-sampling pilot run ({pilot.get('likelihood_calls', 0)} "
                     f"likelihood calls; its ln Z = {pilot.get('ln_z', float('nan')):.1f} is a loose by-product, "
                     f"not an evidence for model comparison).")
    elif conv.get("converged", False):
        notes.append("The convergence rule is necessary, not sufficient: the walkers started near one optimum "
                     "and may never have reached another mode. A nested-sampling pilot explores the whole prior "
                     "first ([sampler] pilot = \"nested\", moves = \"pilot-mixture\").")
    tables = [ReportTable("convergence", "Convergence diagnostics", convergence_overview(run)),
              ReportTable("autocorrelation", "Autocorrelation time per parameter", convergence_table(run),
                          note="τ: integrated autocorrelation time in steps (emcee); chain length / τ should "
                               f"exceed {conv.get('tau_factor', 50)} for a converged run."),
              ReportTable("parameters", "Parameters and derived quantities", parameter_table(run, truths),
                          note="Percentiles of the posterior samples (summary.ecsv); map = value at the "
                               "maximum a posteriori sample." + (" truth: value used to simulate the data."
                                                                 if truths else ""))]
    detections = run_figures.read_optional_table(run.run_dir, run_figures.DETECTIONS)
    bands = run_figures.read_optional_table(run.run_dir, run_figures.BANDS)
    if detections is not None:
        tables.append(ReportTable("detections", "Molecule detections", _display_table(detections),
                                  note="Bayes factors between the model with and without each molecule; see caveats."))
    else:
        notes.append("No detections.ecsv in the run folder: the identification step was not run "
                     "(retrieve identify RUN_DIR), so no detections or flagged bands are shown.")
    if bands is not None:
        tables.append(ReportTable("bands", "Flagged bands", _display_table(bands)))
    figs = []
    for what in figures:
        try:
            fig = run_figures.run_figure(run, what, **({"bands": bands} if what == "spectrum" else {}))
        except UserError as exc:
            notes.append(f"Figure '{what}' not drawn: {exc}")
            continue
        figs.append(ReportFigure(what, CAPTIONS[what], figure_to_png_bytes(fig)))
        close(fig)
    return ReportContent(title=f"Retrieval report: {run.manifest.get('object', 'object')}", inputs=_inputs(run),
                         tables=tables, figures=figs, config_text=run.manifest.get("config_text", ""),
                         notes=notes, caveats=STANDARD_CAVEATS, generated_by=f"retrieve {__version__}")


def build_report(run_dir, out=None, model_factory=None, overwrite: bool = True) -> Path:
    """Write the self-contained HTML report of a run folder.

    Parameters
    ----------
    run_dir : path-like
        A folder written by ``retrieve fit``.
    out : path-like, optional
        Output file (default ``RUN_DIR/report.html``).
    model_factory : callable, optional
        For runs made with a custom model (see :func:`retrieve.inference.load_run`).
    overwrite : bool
        Replace an existing report (it is derived from the run folder, so the default is yes).

    Returns
    -------
    Path
    """
    from ..inference import load_run

    run = load_run(run_dir, model_factory=model_factory)
    out = Path(out) if out is not None else Path(run_dir) / REPORT
    text = render_html(report_content(run))
    atomic_write_text(out, text, overwrite=overwrite)
    return out
