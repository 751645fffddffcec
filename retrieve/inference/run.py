"""The library entry point of a retrieval: :func:`fit` (what ``retrieve fit`` calls).

From Python::

    from retrieve.inference import fit, load_run
    result = fit("fit.toml", out_dir="runs/hr8799e", workers=2)
    run = load_run("runs/hr8799e")
    run.summary

Spectra given on the command line (or as ``spectra=``) complete the
configuration's ``[[datasets]]``:

* ``NAME=PATH`` sets the file of the entry called NAME (a new entry with all
  noise options off if there is none);
* a bare ``PATH`` is matched by the dataset's own name (the file's
  ``dataset_name`` metadata, else its file stem): it replaces the file of
  the entry of that name, or is added as a new dataset (noise options off).

Every dataset must end up with a file.
"""
from __future__ import annotations

import dataclasses
import datetime
import logging
import math
import os
import time
import warnings
from collections import Counter
from pathlib import Path

import numpy as np
from astropy.table import Table

from ..analysis.derived import METHODS, derived_from_parameters, effective_temperature
from ..analysis.summary import summarize, summary_json
from ..constants import PC_M, R_JUP_M
from ..errors import ConfigError, ModelEvaluationError, UserError
from . import rundir
from .config import DatasetConfig, FitConfig, check_coverage, check_parameters, config_to_toml, load_config
from .convergence import burn_in_and_thin
from .likelihood import LogPosterior
from .sampler import run_sampler

log = logging.getLogger(__name__)
PREDICTIVE_PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)


class ForwardModelFactory:
    """Picklable recipe building the :class:`~retrieve.forward_model.ForwardModel` for some datasets.

    The opacity tables are loaded once (:meth:`opacity`) so that their
    coverage can be checked against the configuration before the model is
    assembled; they are not pickled (a worker process loads its own).
    """

    def __init__(self, spec):
        self.spec = spec
        self._opacity = None

    def __getstate__(self):
        return {"spec": self.spec, "_opacity": None}

    def opacity(self):
        """The model's :class:`~retrieve.opacity.opacity_set.OpacitySet` (loaded on first call)."""
        if self._opacity is None:
            from ..opacity.opacity_set import OpacitySet
            kind = None if self.spec.opacity_kind == "auto" else self.spec.opacity_kind
            self._opacity = OpacitySet.load(self.spec.absorbers, self.spec.cia, self.spec.opacity_dir, kind=kind)
        return self._opacity

    def coverage(self) -> dict:
        """Coverage of the tables; temperature from the molecular tables only (CIA does not limit it)."""
        opacity = self.opacity()
        cov = opacity.coverage()
        t = [tab.coverage()["temperature_K"] for tab in opacity.molecular.values()]
        if t:
            cov["temperature_K"] = (max(a for a, _ in t), min(b for _, b in t))
        return cov

    def __call__(self, object_data):
        from ..forward_model import ForwardModel
        return ForwardModel(self.spec, object_data.datasets, opacity=self.opacity())


@dataclasses.dataclass
class RunResult:
    """What :func:`fit` returns (everything is also in the run folder)."""

    run_dir: Path
    converged: bool
    n_steps: int
    n_walkers: int
    tau: np.ndarray
    acceptance_fraction: float
    summary: Table
    samples: Table
    failures: Counter
    n_evaluations: int
    elapsed_s: float
    evaluations_per_s: float
    burn_in: int
    thin: int


# --------------------------------------------------------------------------- datasets
def merge_spectra(config: FitConfig, spectra) -> FitConfig:
    """Apply command-line spectra to the configuration's datasets (rules in the module docstring)."""
    entries = list(config.datasets)
    for item in spectra or ():
        item = str(item)
        name, _, path = item.partition("=") if "=" in item and not os.path.exists(item) else ("", "", item)
        path = Path(path)
        if not name:
            from ..observations.readers import read_dataset
            name = read_dataset(path).name
        for i, d in enumerate(entries):
            if d.name == name:
                entries[i] = dataclasses.replace(d, file=path)
                break
        else:
            entries.append(DatasetConfig(name=name, file=path))
    if not entries:
        raise ConfigError(f"{config.where}: no datasets; add [[datasets]] entries or give SPECTRUM files")
    for d in entries:
        if d.file is None:
            raise ConfigError(f"{config.where} [[datasets]] {d.name}: no 'file'; set file = \"...\" or give "
                              f"{d.name}=PATH on the command line")
    return config.replace(datasets=tuple(entries))


def read_datasets(config: FitConfig):
    """Read every configured dataset into an :class:`~retrieve.observations.ObjectData`."""
    from ..observations.readers import read_object
    return read_object([d.reader_spec() for d in config.datasets], name=config.object_name)


# --------------------------------------------------------------------------- posterior
def _required_groups(model) -> list[tuple[str, ...]]:
    groups = getattr(model, "required_parameters", None)
    if callable(groups):
        return [tuple(g) for g in groups()]
    return [(n,) for n in model.parameter_names]


def _resolve_groups(config: FitConfig, groups) -> list[str]:
    """Pick the given name out of each alternative group (e.g. distance_pc / parallax_mas)."""
    given = {**config.fixed, **config.free}
    names = []
    for group in groups:
        present = [n for n in group if n in given]
        if len(present) > 1:
            raise ConfigError(f"{config.where} [parameters]: give only one of {' / '.join(group)}")
        names.append(present[0] if present else group[0])
    return names


def build_posterior(config: FitConfig, object_data, model_factory=None):
    """Model + checked parameters → :class:`LogPosterior` (and the model).

    Raises
    ------
    ConfigError
        Missing / unknown parameters, priors outside the opacity coverage,
        datasets outside the tables' wavelength range.
    """
    if model_factory is None:
        model_factory = ForwardModelFactory(config.model_spec())
    early = getattr(model_factory, "coverage", None)
    if callable(early):      # check before assembling, so the message names the config key / dataset
        check_coverage(config, _prefixed(config, early), object_data)
    try:
        model = model_factory(object_data)
    except ConfigError as exc:
        msg = str(exc)
        raise ConfigError(msg if msg.startswith(config.where) else f"{config.where}: {msg}") from None
    check_parameters(config, _resolve_groups(config, _required_groups(model)))
    coverage = getattr(model, "coverage", None)
    check_coverage(config, coverage() if callable(coverage) else coverage, object_data)
    noise = {d.name: d.noise_switches() for d in config.datasets}
    post = LogPosterior(model_factory, object_data, config.free, config.fixed, noise)
    post._model = model
    return post, model


def _prefixed(config, func):
    try:
        return func()
    except ConfigError as exc:
        msg = str(exc)
        raise ConfigError(msg if msg.startswith(config.where) else f"{config.where}: {msg}") from None


# --------------------------------------------------------------------------- post-processing
def _distance_m(params) -> float | None:
    if "distance_pc" in params:
        return params["distance_pc"] * PC_M
    if "parallax_mas" in params:
        return 1000.0 / params["parallax_mas"] * PC_M
    return None


def _teff(output, params) -> float:
    """T_eff of one model evaluation (NaN when the model has no emergent spectrum)."""
    flux = getattr(output, "flux_highres", None)
    d = _distance_m(params)
    if flux is None or d is None or "radius_rjup" not in params:
        return math.nan
    dilution = (params["radius_rjup"] * R_JUP_M / d) ** 2
    return effective_temperature(output.wavelength_um, np.asarray(flux) / dilution)


def _predictive(post: LogPosterior, theta_draws: np.ndarray, theta_map: np.ndarray):
    """Model per dataset (scale applied) at the MAP and at posterior draws, plus T_eff of each."""
    def one(theta):
        params = post.params(theta)
        with np.errstate(all="ignore"):
            out = post.model_output(params)
        per = {t.name: np.asarray(out.per_dataset[t.name], float) *
               (params[f"scale_{t.name}"] if t.scale else 1.0) for t in post.terms}
        return per, _teff(out, params)

    best, teff_map = one(theta_map)
    draws, teffs = {t.name: [] for t in post.terms}, []
    for theta in theta_draws:
        try:
            per, teff = one(theta)
        except ModelEvaluationError:
            continue
        for k, v in per.items():
            draws[k].append(v)
        teffs.append(teff)
    return best, {k: np.array(v) for k, v in draws.items()}, teff_map, np.array(teffs)


def _spectrum_table(dataset, best, draws) -> Table:
    t = Table()
    t["wavelength"] = dataset.wavelength_um
    t["wavelength"].unit = "um"
    if dataset.filters:
        t["filter"] = list(dataset.filters)
    flux_unit = "W m-2 um-1"
    t["data"] = dataset.flux
    t["uncertainty"] = np.sqrt(dataset.variance())
    t["model_best"] = best
    if draws.size:
        pct = np.percentile(draws, PREDICTIVE_PERCENTILES, axis=0)
    else:
        pct = np.full((len(PREDICTIVE_PERCENTILES), dataset.n_points), np.nan)
    for p, row in zip(("p2_5", "p16", "p50", "p84", "p97_5"), pct):
        t[f"model_{p}"] = row
    for col in t.colnames:
        if col not in ("wavelength", "filter"):
            t[col].unit = flux_unit
    t.meta["dataset_name"] = dataset.name
    t.meta["predictive_draws"] = int(draws.shape[0]) if draws.size else 0
    t.meta["description"] = ("model_best: model at the maximum a posteriori sample; model_pXX: percentiles of "
                             "the model (flux-scale factor applied, no noise) over posterior draws")
    return t


def _samples_table(post: LogPosterior, flat: np.ndarray, flat_lp: np.ndarray):
    t = Table()
    for i, name in enumerate(post.param_names):
        t[name] = flat[:, i]
    params = {**{k: np.full(flat.shape[0], v) for k, v in post.fixed.items()},
              **{n: flat[:, i] for i, n in enumerate(post.param_names)}}
    derived = derived_from_parameters(params)
    for name, values in derived.items():
        t[name] = values
    t["log_prob"] = flat_lp
    return t, derived


# --------------------------------------------------------------------------- fit
def fit(config, spectra=None, out_dir="run", workers: int = 1, max_steps: int | None = None,
        seed: int | None = None, resume: bool = False, overwrite: bool = False,
        model_factory=None, progress: bool | None = None, pool=None) -> RunResult:
    """Run a retrieval and write the run folder.

    Parameters
    ----------
    config : str, Path or FitConfig
        The fit configuration (TOML file or already parsed).
    spectra : list of str, optional
        Extra / replacement dataset files (``PATH`` or ``NAME=PATH``; see module docstring).
    out_dir : path-like
        Run folder; must not exist (or be empty) unless ``overwrite`` or ``resume``.
    workers : int
        Processes evaluating the posterior in parallel.
    max_steps, seed : int, optional
        Override ``[sampler] max_steps`` / ``seed``.
    resume : bool
        Continue the chain in ``out_dir/chain.h5``.
    overwrite : bool
        Replace an existing run folder.
    model_factory : callable, optional
        ``factory(object_data) -> model`` for a model other than the ForwardModel
        (tests, notebooks); it must be picklable for ``workers > 1``.
    progress : bool, optional
        Show the progress bar (default: ``[sampler] progress``).
    pool : object with ``map(func, iterable)``, optional
        External pool for the posterior evaluations (e.g. an MPI pool); the
        caller owns it.  ``workers`` is then only recorded in the manifest.

    Returns
    -------
    RunResult
    """
    t_start = time.time()
    config = config if isinstance(config, FitConfig) else load_config(config)
    config = merge_spectra(config, spectra)
    overrides = {k: v for k, v in (("max_steps", max_steps), ("seed", seed)) if v is not None}
    if overrides:
        config = config.replace(sampler=dataclasses.replace(config.sampler, **overrides))
    if int(workers) < 1:
        raise UserError(f"workers must be >= 1, got {workers}")
    object_data = read_datasets(config)
    post, model = build_posterior(config, object_data, model_factory)
    out = rundir.prepare_run_dir(out_dir, overwrite=overwrite, resume=resume)
    manifest = _start_manifest(config, object_data, model, model_factory, post, workers)
    if not resume:
        rundir.write_text(out / rundir.CONFIG, config.text or config_to_toml(config))
        (out / rundir.DATA_DIR).mkdir(exist_ok=True)
        from ..observations.writers import write_dataset
        for d in object_data.datasets:
            write_dataset(d, out / rundir.DATA_DIR / f"{d.name}.ecsv", overwrite=True)
        rundir.write_json(out / rundir.MANIFEST, {**manifest, "status": "sampling"})
    else:
        previous = rundir.read_json(out / rundir.MANIFEST)
        changed = [p for p, h in manifest["input_sha256"].items() if previous.get("input_sha256", {}).get(p, h) != h]
        if changed:
            raise UserError(f"{changed[0]}: changed since the run started (sha256 differs); "
                            f"use --overwrite to start afresh")
        manifest["started_utc"] = previous.get("started_utc", manifest["started_utc"])

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        res = run_sampler(post, config.sampler, out / rundir.CHAIN, workers=workers, resume=resume,
                          config_digest=config.digest, progress=progress, pool=pool)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return _finish(config, post, object_data, res, out, manifest, t_start, workers)


def _start_manifest(config, object_data, model, model_factory, post, workers) -> dict:
    inputs = {}
    for d in config.datasets:
        for p in (d.file, d.covariance):
            if p is not None and Path(p).is_file():
                inputs[str(Path(p).resolve())] = rundir.sha256_file(p)
    return {
        "format": "retrieve-run", "format_version": 1,
        "object": config.object_name,
        "config_file": str(config.source) if config.source else None,
        "config_base_dir": str(Path(config.base_dir).resolve()),
        "config_text": config.text,
        "config_digest": config.digest,
        "model_factory": "ForwardModel" if model_factory is None else
        f"{type(model_factory).__module__}.{type(model_factory).__qualname__}",
        "datasets": [{"name": d.name, "file": str(Path(d.file).resolve()), "copy": f"{rundir.DATA_DIR}/{d.name}.ecsv",
                      "scale": d.scale, "inflate_errors": d.inflate_errors,
                      "correlated_noise": d.correlated_noise,
                      "n_points": object_data[d.name].n_points, "kind": object_data[d.name].kind}
                     for d in config.datasets],
        "input_sha256": inputs,
        "opacity_tables": rundir.opacity_checksums(model),
        "param_names": post.param_names,
        "fixed": post.fixed,
        "priors": {k: p.to_dict() for k, p in post.free.items()},
        "sampler": dataclasses.asdict(config.sampler),
        "seed": config.sampler.seed,
        "workers": int(workers),
        "versions": rundir.package_versions(),
        "started_utc": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
    }


def _finish(config, post, object_data, res, out, manifest, t_start, workers) -> RunResult:
    ck = res.checkpoint
    s = config.sampler
    burn, thin = burn_in_and_thin(res.tau, ck.n_steps, s.burn_in_tau, s.thin_tau, s.burn_in, s.thin)
    flat = ck.chain[burn::thin].reshape(-1, ck.chain.shape[-1])
    flat_lp = ck.log_prob[burn::thin].reshape(-1)
    i_map = np.unravel_index(np.argmax(ck.log_prob), ck.log_prob.shape)
    theta_map = ck.chain[i_map]
    samples, derived = _samples_table(post, flat, flat_lp)
    rng = np.random.default_rng(np.random.SeedSequence([int(s.seed), 1]))
    n_draw = min(s.predictive_draws, flat.shape[0])
    pick = rng.choice(flat.shape[0], size=n_draw, replace=False) if n_draw else np.array([], int)
    best, draws, teff_map, teffs = _predictive(post, flat[pick], theta_map)

    map_params = post.params(theta_map)
    map_derived = {k: float(v) for k, v in derived_from_parameters(
        {k: np.array(v) for k, v in map_params.items()}).items()}
    quantities = {name: samples[name] for name in post.param_names}
    quantities.update({name: samples[name] for name in derived})
    methods = {k: METHODS[k] for k in derived}
    if np.any(np.isfinite(teffs)):
        quantities["teff_k"] = teffs
        map_derived["teff_k"] = teff_map
        methods["teff_k"] = METHODS["teff_k"] + f" ({teffs.size} posterior draws)"
    summary = summarize(quantities, {**map_params, **map_derived}, methods)

    rundir.write_table(samples, out / rundir.SAMPLES)
    rundir.write_table(summary, out / rundir.SUMMARY_ECSV)
    rundir.write_text(out / rundir.SUMMARY_JSON, summary_json(
        summary, object=config.object_name, converged=res.converged, n_samples=int(flat.shape[0])) + "\n")
    for d in object_data.datasets:
        rundir.write_table(_spectrum_table(d, best[d.name], draws[d.name]),
                           out / rundir.SPECTRUM.format(name=d.name))

    sampling_evals = max(res.n_evaluations, 1)
    evals_per_s = sampling_evals / max(res.elapsed_s, 1e-9)
    manifest.update({
        "status": "finished",
        "finished_utc": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "wall_time_s": time.time() - t_start,
        "sampler_time_s": res.elapsed_s,
        "resumed_from_step": res.resumed_from,
        "n_evaluations": res.n_evaluations,
        "evaluations_per_s": evals_per_s,
        "evaluation_failures": dict(res.failures),
        "convergence": {
            "converged": res.converged, "n_steps": ck.n_steps, "n_walkers": ck.n_walkers,
            "tau": [float(x) for x in res.tau], "tau_factor": s.tau_factor, "tau_rtol": s.tau_rtol,
            "acceptance_fraction": float(np.mean(res.acceptance_fraction)),
            "burn_in": burn, "thin": thin, "n_samples": int(flat.shape[0]),
        },
        "map_parameters": map_params,
        "map_log_prob": float(ck.log_prob[i_map]),
        # the nested-sampling pilot that placed the walkers (empty without one); its ln Z is a
        # loose by-product, not an evidence for model comparison
        "pilot": dict(res.pilot),
    })
    rundir.write_json(out / rundir.MANIFEST, manifest)
    if res.failures:
        log.warning("model evaluation failures: %s",
                    ", ".join(f"{k}: {v}" for k, v in res.failures.most_common()))
    return RunResult(run_dir=out, converged=res.converged, n_steps=ck.n_steps, n_walkers=ck.n_walkers,
                     tau=res.tau, acceptance_fraction=float(np.mean(res.acceptance_fraction)),
                     summary=summary, samples=samples, failures=res.failures,
                     n_evaluations=res.n_evaluations, elapsed_s=time.time() - t_start,
                     evaluations_per_s=evals_per_s, burn_in=burn, thin=thin)
