"""Figures of a run folder: the glue between :func:`retrieve.inference.load_run` and the figure modules.

Each ``*_figure(run, ...)`` reads what it needs from a
:class:`retrieve.inference.Run` (samples, summary, spectra tables, the
rebuilt forward model) and calls the plain-array figure function.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from astropy.table import Table

from ..errors import ModelEvaluationError, UserError
from . import style
from .abundance_plot import plot_abundances
from .corner_plot import plot_corner
from .profile_plot import plot_profile
from .spectrum_plot import Envelope, plot_spectrum

FIGURES = ("corner", "spectrum", "profile", "abundances")
NUISANCE_PREFIXES = ("scale_", "log_inflate_", "gp_amp_", "gp_length_um_")
DERIVED_FOR_CORNER = ("mass_mjup", "c_to_o")
#: Fallback upper-limit rule when no detections table exists (our convention): the
#: posterior's 2.5th percentile lies within this fraction of the prior width of the prior's lower edge.
UPPER_LIMIT_EDGE_FRACTION = 0.05
DETECTIONS = "detections.ecsv"
BANDS = "bands.ecsv"


# --------------------------------------------------------------------------- inputs
def simulation_truths(object_data) -> dict[str, float]:
    """True parameter values recorded in the metadata of simulated datasets (empty if none).

    Accepts a ``truths`` mapping (or its JSON text) in a dataset's metadata.
    """
    truths: dict[str, float] = {}
    for d in getattr(object_data, "datasets", object_data):
        meta = d.meta or {}
        value = meta.get("truths", meta.get("truth"))
        if isinstance(value, str):
            try:
                value = json.loads(value)
            except json.JSONDecodeError:
                value = None
        if isinstance(value, dict):
            for k, v in value.items():
                if isinstance(v, (int, float)) and not isinstance(v, bool):
                    truths[str(k)] = float(v)
    return truths


def read_optional_table(run_dir, name: str) -> Table | None:
    """An ECSV table of the run folder (e.g. ``detections.ecsv``), or None if absent."""
    path = Path(run_dir) / name
    return Table.read(path, format="ascii.ecsv") if path.is_file() else None


def molecules(run) -> list[str]:
    """Absorbers with a free ``log_vmr_<X>`` parameter, in parameter order."""
    return [n[len("log_vmr_"):] for n in run.param_names if n.startswith("log_vmr_")]


def physical_parameters(run) -> list[str]:
    """Free parameters that are not likelihood nuisance parameters."""
    return [n for n in run.param_names if not n.startswith(NUISANCE_PREFIXES)]


# --------------------------------------------------------------------------- figures
def corner_figure(run, subset=None, include_nuisance: bool = False):
    """Corner plot of the run's posterior (physical parameters + mass and C/O by default)."""
    samples = run.samples
    if subset is None:
        names = list(run.param_names) if include_nuisance else physical_parameters(run)
        names += [n for n in DERIVED_FOR_CORNER if n in samples.colnames
                  and np.all(np.isfinite(np.asarray(samples[n], float)))]
    else:
        names = list(subset)
    return plot_corner(samples, names=names, truths=derived_truths(simulation_truths(run.object_data)))


def derived_truths(truths: dict) -> dict:
    """Truths plus the derived quantities (mass, C/O, ...) computed from them, when possible."""
    if not truths:
        return truths
    try:
        from ..analysis.derived import derived_from_parameters
        extra = derived_from_parameters({k: np.array([v]) for k, v in truths.items()})
    except (ImportError, KeyError, ValueError):
        return truths
    return {**{k: float(np.ravel(v)[0]) for k, v in extra.items()}, **truths}


def _highres(run, datasets):
    """MAP model on the model grid, with the first spectrum's flux scale applied (None if unavailable)."""
    try:
        params = run.map_parameters
        out = run.forward_model.evaluate(params)
    except (ModelEvaluationError, AttributeError, KeyError, TypeError):
        return None
    if getattr(out, "flux_highres", None) is None:
        return None
    spectra = [d for d in datasets if d.kind == "spectrum"]
    scale = params.get(f"scale_{spectra[0].name}", 1.0) if spectra else 1.0
    return np.asarray(out.wavelength_um), np.asarray(out.flux_highres) * scale


def spectrum_figure(run, bands: Table | None = None, highres: bool = True):
    """Data, MAP model, predictive envelopes and residuals from the run's ``spectrum_<name>.ecsv``."""
    datasets = run.object_data.datasets
    best, envelopes = {}, {}
    for d in datasets:
        t = run.spectrum(d.name)
        best[d.name] = np.asarray(t["model_best"], float)
        lo2, lo1, hi1, hi2 = (np.asarray(t[f"model_{p}"], float) for p in ("p2_5", "p16", "p84", "p97_5"))
        if np.all(np.isfinite(lo2)):
            envelopes[d.name] = Envelope(lo1=lo1, hi1=hi1, lo2=lo2, hi2=hi2)
    if bands is None:
        bands = read_optional_table(run.run_dir, BANDS)
    return plot_spectrum(datasets, best, envelopes=envelopes, bands=bands,
                         highres=_highres(run, datasets) if highres else None,
                         title=run.manifest.get("object"))


def _posterior_draws(run, n: int, seed: int):
    samples = run.samples
    rng = np.random.default_rng(seed)
    idx = rng.choice(len(samples), size=min(n, len(samples)), replace=False)
    fixed = dict(run.manifest.get("fixed", {}))
    for i in idx:
        params = dict(fixed)
        params.update({name: float(samples[name][i]) for name in run.param_names})
        yield params


def profile_figure(run, n_draws: int = 80, seed: int = 0):
    """T–P posterior (``n_draws`` model evaluations) and the MAP contribution function."""
    model = run.forward_model
    if not hasattr(model, "pressure_bar"):
        raise UserError(f"{run.run_dir}: the run's model has no temperature profile to plot")
    temps = []
    for params in _posterior_draws(run, n_draws, seed):
        try:
            temps.append(model.evaluate(params).temperature_K)
        except ModelEvaluationError:
            continue
    best = model.evaluate(run.map_parameters, contribution=True)
    truths = simulation_truths(run.object_data)
    truth_t = None
    if truths:
        try:
            truth_t = model.evaluate({**run.map_parameters, **truths}).temperature_K
        except (ModelEvaluationError, KeyError):
            truth_t = None
    return plot_profile(best.pressure_bar, np.array(temps) if temps else best.temperature_K,
                        contribution=best.contribution, contribution_wavelength_um=best.wavelength_um,
                        truth_temperature_K=truth_t, title=run.manifest.get("object"))


def upper_limit_classes(run, detections: Table | None = None) -> dict[str, bool]:
    """Which abundances are upper limits.

    From the identification step's ``detections.ecsv`` (column ``abundance_class``) when present,
    else :func:`retrieve.analysis.abundance_class.classify_abundance`, else the prior-edge rule
    :data:`UPPER_LIMIT_EDGE_FRACTION`.
    """
    mols = molecules(run)
    if detections is None:
        detections = read_optional_table(run.run_dir, DETECTIONS)
    classes = {}
    if detections is not None and "abundance_class" in detections.colnames:
        for row in detections:
            classes[str(row["molecule"])] = "upper" in str(row["abundance_class"]).lower()
    priors = run.config.free
    try:  # the identification step's rule, when that module is installed
        from ..analysis.abundance_class import classify_abundance
    except ImportError:
        classify_abundance = None
    for mol in mols:
        if mol in classes:
            continue
        prior = priors[f"log_vmr_{mol}"]
        x = np.asarray(run.samples[f"log_vmr_{mol}"], float)
        if classify_abundance is not None:
            classes[mol] = classify_abundance(x, prior=prior).label == "upper limit"
        else:
            low, high = prior.bounds
            classes[mol] = bool(np.percentile(x, 2.5) - low < UPPER_LIMIT_EDGE_FRACTION * (high - low))
    return classes


def abundances_figure(run, detections: Table | None = None):
    """One panel per retrieved absorber; upper limits from the detections table or the prior-edge rule."""
    mols = molecules(run)
    if not mols:
        raise UserError(f"{run.run_dir}: the run has no free log_vmr_<molecule> parameters")
    priors = run.config.free
    truths = simulation_truths(run.object_data)
    return plot_abundances(run.samples, mols, upper_limits=upper_limit_classes(run, detections),
                           prior_ranges={m: tuple(priors[f"log_vmr_{m}"].bounds) for m in mols},
                           truths={m: truths[f"log_vmr_{m}"] for m in mols if f"log_vmr_{m}" in truths})


def run_figure(run, what: str, **kwargs):
    """One of :data:`FIGURES` for a run."""
    makers = {"corner": corner_figure, "spectrum": spectrum_figure, "profile": profile_figure,
              "abundances": abundances_figure}
    if what not in makers:
        raise UserError(f"unknown figure {what!r}; choose from {', '.join(FIGURES)}")
    return makers[what](run, **kwargs)


def write_run_figures(run, whats=FIGURES, fmt: str = "png", out_dir=None) -> list[Path]:
    """Write figures of a run to ``out_dir`` (default ``RUN_DIR/figures``) as ``<what>.<fmt>``."""
    out_dir = Path(out_dir) if out_dir is not None else Path(run.run_dir) / "figures"
    paths = []
    for what in whats:
        fig = run_figure(run, what)
        paths.append(style.save_figure(fig, out_dir / f"{what}.{fmt}", fmt))
        style.close(fig)
    return paths
