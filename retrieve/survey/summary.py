"""The survey summary table and the survey-level band-depth figure.

``survey_summary.ecsv`` has one row per catalogue object:

* ``object``, ``status`` (finished / failed), ``error``, ``converged``,
  ``n_steps``, ``n_walkers``, ``acceptance``, ``max_tau``;
* for every quantity in any object's ``summary.ecsv`` (free parameters,
  derived mass, C/O, metallicity, T_eff): ``<q>_median``, ``<q>_p16``, ``<q>_p84``;
* detections, when the identification step wrote ``detections.ecsv`` in the
  run folder: ``sigma_<molecule>`` (equivalent significance),
  ``ln_b_<molecule>`` and ``class_<molecule>`` (abundance class), and
  ``bands_detected`` from ``bands.ecsv`` (``molecule:band`` of detected bands);
* band depths measured on the fitted spectra (model-independent indices of
  :mod:`retrieve.analysis.indices`, when that module is available):
  ``<index>`` and ``<index>_err`` (Monte Carlo over the noise, seeded);
* any extra catalogue columns, unchanged.

Missing numbers are NaN, missing text is empty.
"""
from __future__ import annotations

import logging
import math
from pathlib import Path

import numpy as np
from astropy.table import Table

log = logging.getLogger(__name__)
INDEX_DRAWS = 1000
# (x, y) index pairs for the figure, in order of preference: H band, J band, K band
FIGURE_PAIRS = (("h2o_h", "ch4_h"), ("h2o_j", "ch4_j"), ("h2o_k", "ch4_k"))
_LABELS = {"h2o": r"H$_2$O", "ch4": r"CH$_4$"}


def _label(index: str) -> str:
    mol, band = index.split("_")
    return f"{_LABELS.get(mol, mol)}-{band.upper()} index (data)"


def _read(path: Path) -> Table | None:
    try:
        return Table.read(path, format="ascii.ecsv") if path.is_file() else None
    except Exception as exc:  # a damaged file should not sink the whole summary
        log.warning("%s: unreadable (%s)", path, exc)
        return None


def _manifest(run_dir: Path) -> dict:
    from ..inference import rundir
    try:
        return rundir.read_json(run_dir / rundir.MANIFEST)
    except Exception:
        return {}


def _quantities(summary: Table) -> dict:
    return {str(r["name"]): (float(r["median"]), float(r["p16"]), float(r["p84"])) for r in summary}


def _detections(run_dir: Path) -> dict:
    """Columns from ``detections.ecsv`` / ``bands.ecsv`` of the identification step (empty if absent)."""
    out = {}
    det = _read(run_dir / "detections.ecsv")
    if det is not None and "molecule" in det.colnames:
        for r in det:
            m = str(r["molecule"])
            for col, key in (("significance_sigma", f"sigma_{m}"), ("ln_bayes_factor", f"ln_b_{m}")):
                if col in det.colnames:
                    out[key] = float(r[col])
            if "abundance_class" in det.colnames:
                out[f"class_{m}"] = str(r["abundance_class"])
    bands = _read(run_dir / "bands.ecsv")
    if bands is not None and {"molecule", "band", "flag"} <= set(bands.colnames):
        out["bands_detected"] = ",".join(f"{r['molecule']}:{r['band']}" for r in bands
                                         if str(r["flag"]) == "detected")
    return out


def band_depths(run_dir: Path, seed: int = 0) -> dict:
    """Data-only spectral indices of the fitted spectra in ``run_dir/data`` (first covering dataset wins)."""
    try:
        from ..analysis.indices import BURGASSER_2006, measure_index
    except ImportError:
        return {}
    from ..observations.readers import read_dataset
    out = {}
    for path in sorted((run_dir / "data").glob("*.ecsv")):
        try:
            ds = read_dataset(path, name=path.stem)
        except Exception as exc:
            log.warning("%s: unreadable (%s)", path, exc)
            continue
        for i, definition in enumerate(BURGASSER_2006):
            if math.isfinite(out.get(definition.name, math.nan)):
                continue
            try:
                v = measure_index(ds, definition, n_draws=INDEX_DRAWS, rng=np.random.default_rng([seed, i]))
            except Exception as exc:  # e.g. a covariance that is not positive definite
                log.warning("%s: index %s not measured (%s)", path, definition.name, exc)
                continue
            out[definition.name], out[f"{definition.name}_err"] = v.value, v.err
    return out


def object_row(name: str, status_row, run_dir: Path) -> dict:
    """Everything the summary knows about one object (flat dict of scalars)."""
    from ..inference import rundir
    row = {"object": name, "status": str(status_row["status"]), "error": str(status_row["error"])}
    if row["status"] != "finished":
        return row
    conv = _manifest(run_dir).get("convergence", {})
    tau = [t for t in conv.get("tau", []) if t is not None and math.isfinite(t)]
    row.update(converged=bool(conv.get("converged", False)), n_steps=conv.get("n_steps", math.nan),
               n_walkers=conv.get("n_walkers", math.nan), acceptance=conv.get("acceptance_fraction", math.nan),
               max_tau=max(tau) if tau else math.nan)
    summary = _read(run_dir / rundir.SUMMARY_ECSV)
    if summary is not None:
        for q, (med, lo, hi) in _quantities(summary).items():
            row[f"{q}_median"], row[f"{q}_p16"], row[f"{q}_p84"] = med, lo, hi
    row.update(_detections(run_dir))
    row.update(band_depths(run_dir))
    return row


def _column(values: list):
    """A column from per-row values: float where all present values are numbers, else text."""
    present = [v for v in values if v is not None]
    if present and all(isinstance(v, (bool, np.bool_)) for v in present):
        return [bool(v) if v is not None else False for v in values]
    if all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))
           for v in present):
        return np.array([float(v) if v is not None else math.nan for v in values])
    return [str(v) if v is not None else "" for v in values]


def survey_summary(status: Table, out_dir, entries=()) -> Table:
    """One row per object from the status table, the run folders and the catalogue (see module docstring)."""
    out_dir = Path(out_dir)
    info = {e.name: e.info for e in entries}
    rows = [object_row(str(s["object"]), s, out_dir / str(s["object"])) for s in status]
    for r in rows:
        for k, v in info.get(r["object"], {}).items():
            r.setdefault(k, v.item() if hasattr(v, "item") else v)
    names: list[str] = []
    for r in rows:
        names += [k for k in r if k not in names]
    t = Table()
    for k in names:
        t[k] = _column([r.get(k) for r in rows])
    t.meta["description"] = ("retrieve batch survey summary: one row per object; <q>_median/_p16/_p84 from "
                             "each run's summary.ecsv; band indices measured on the data")
    return t


def survey_figure(summary: Table, path) -> Path | None:
    """Water against methane index of every object with both (None when no pair is measured)."""
    try:
        from ..plotting.band_diagram import plot_band_diagram
    except ImportError:
        return None
    best, best_n = None, 0
    for x, y in FIGURE_PAIRS:
        if x in summary.colnames and y in summary.colnames:
            n = int(np.sum(np.isfinite(np.asarray(summary[x], float)) & np.isfinite(np.asarray(summary[y], float))))
            if n > best_n:
                best, best_n = (x, y), n
    if best is None:
        return None
    x, y = best
    ok = np.isfinite(np.asarray(summary[x], float)) & np.isfinite(np.asarray(summary[y], float))
    fig = plot_band_diagram(summary[ok], x=x, y=y, name="object", x_label=_label(x), y_label=_label(y))
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp.png")
    fig.savefig(tmp, dpi=150)
    tmp.replace(path)
    return path
