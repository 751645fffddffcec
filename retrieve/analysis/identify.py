"""Molecule identification for a finished fit: reduced fits, Bayes factors, classes, band flags.

For each absorber X whose ``log_vmr_X`` is free in the run:

1. the *reduced* fit is the same configuration with ``log_vmr_X`` fixed at
   :data:`~retrieve.analysis.band_flags.NEGLIGIBLE_LOG_VMR` (10⁻³⁰: the
   molecule contributes nothing, everything else — T–P profile, other
   abundances, noise and calibration parameters, priors, data — is
   unchanged).  It runs through :func:`retrieve.inference.fit` into
   ``RUN_DIR/identify/without_<X>/`` (reused when it already holds a finished
   run of the same configuration), in a process pool of ``workers``;
2. both evidences come from bridge sampling on the posterior samples
   (:func:`retrieve.analysis.evidence.evidence_of_run`); ln B = ln Z_full −
   ln Z_reduced, its error the quadrature sum of both;
3. ln B → equivalent σ (:mod:`retrieve.analysis.significance`);
4. the ``log_vmr_X`` posterior of the full fit is classified
   (:mod:`retrieve.analysis.abundance_class`);
5. each catalogued band of X in the data's range is flagged
   (:mod:`retrieve.analysis.band_flags`).

Outputs (written atomically into the run folder): ``detections.ecsv`` (one
row per molecule) and ``bands.ecsv`` (one row per molecule and band), with
the caveats and rules in their metadata.
"""
from __future__ import annotations

import concurrent.futures as cf
import dataclasses
import logging
import math
from pathlib import Path

from astropy.table import Table

from ..errors import UserError
from .abundance_class import RULE as CLASS_RULE
from .abundance_class import classify_abundance
from .band_catalogue import load_catalogue
from .band_flags import NEGLIGIBLE_LOG_VMR, band_flags_of_run
from .evidence import evidence_of_run, nested_evidence_of_run
from .significance import CAVEAT, sigma_from_ln_bayes

log = logging.getLogger(__name__)
DETECTIONS = "detections.ecsv"
BANDS = "bands.ecsv"
IDENTIFY_DIR = "identify"
DETECTION_COLUMNS = ("molecule", "ln_bayes_factor", "ln_bayes_factor_err", "significance_sigma",
                     "abundance_class", "log_vmr_median", "log_vmr_lo", "log_vmr_hi", "upper_limit_95",
                     "lower_limit_95", "ln_z_full", "ln_z_full_err", "ln_z_reduced", "ln_z_reduced_err",
                     "reduced_converged", "ln_bayes_factor_nested", "ln_bayes_factor_nested_err")
BAND_COLUMNS = ("molecule", "band", "center_um", "window_lo_um", "window_hi_um", "flag", "significance_sigma",
                "channels", "chi2", "n_channels", "sigma_p16", "sigma_p84")


@dataclasses.dataclass
class IdentifyResult:
    """What :func:`identify` returns (both tables are also written to the run folder)."""

    detections: Table
    bands: Table
    run_dir: Path
    skipped: dict


def free_molecules(run) -> list[str]:
    """Absorbers of the run whose log VMR is a free parameter, in ``[model] absorbers`` order."""
    absorbers = run.config.model_mapping.get("absorbers", [])
    return [m for m in absorbers if f"log_vmr_{m}" in run.param_names]


def reduced_config(config, molecule: str):
    """The configuration with ``log_vmr_<molecule>`` fixed at the negligible value."""
    name = f"log_vmr_{molecule}"
    if name not in config.free:
        raise UserError(f"{config.where} [parameters]: {name} is not a free parameter; nothing to remove")
    free = {k: v for k, v in config.free.items() if k != name}
    if not free:
        raise UserError(f"{config.where} [parameters]: {name} is the only free parameter; a reduced fit "
                        f"would have nothing to sample")
    return config.replace(free=free, fixed={**config.fixed, name: NEGLIGIBLE_LOG_VMR}, text="")


def _n_walkers(run) -> int:
    return int(run.manifest.get("convergence", {}).get("n_walkers", 1) or 1)


def _evidence(run, n_proposal, seed, proposal="normal"):
    s = run.samples
    log_prob = s["log_prob"] if "log_prob" in s.colnames else None
    return evidence_of_run(run.log_posterior, s, log_prob=log_prob, n_proposal=n_proposal, seed=seed,
                           n_chains=_n_walkers(run), proposal=proposal)


@dataclasses.dataclass
class _ReducedTask:
    """One reduced fit + its evidence; picklable for the process pool."""

    config: object
    out_dir: Path
    molecule: str
    max_steps: int | None
    n_proposal: int | None
    seed: int
    model_factory: object = None
    refit: bool = False
    nlive: int = 0
    proposal: str = "normal"

    def __call__(self) -> dict:
        from ..inference.rundir import MANIFEST, load_run, read_json
        from ..inference.run import fit
        manifest = self.out_dir / MANIFEST
        reuse = False
        if manifest.is_file() and not self.refit:
            m = read_json(manifest)
            reuse = m.get("status") == "finished" and m.get("config_digest") == self.config.digest
        if not reuse:
            fit(self.config, out_dir=self.out_dir, workers=1, max_steps=self.max_steps, overwrite=True,
                model_factory=self.model_factory, progress=False)
        run = load_run(self.out_dir, model_factory=self.model_factory)
        ev = _evidence(run, self.n_proposal, self.seed, self.proposal)
        conv = run.manifest.get("convergence", {})
        out = {"molecule": self.molecule, "ln_z": ev.ln_z, "ln_z_err": ev.ln_z_err,
               "converged": bool(conv.get("converged", False)), "reused": reuse}
        if self.nlive:
            nested = nested_evidence_of_run(run.log_posterior, nlive=self.nlive, seed=self.seed)
            out.update(ln_z_nested=nested.ln_z, ln_z_nested_err=nested.ln_z_err)
        return out


def _run_reduced(tasks, workers: int) -> dict:
    if workers <= 1 or len(tasks) <= 1:
        return {t.molecule: t() for t in tasks}
    out = {}
    with cf.ProcessPoolExecutor(max_workers=min(workers, len(tasks))) as pool:
        futures = {pool.submit(t): t.molecule for t in tasks}
        for fut in cf.as_completed(futures):
            out[futures[fut]] = fut.result()
    return out


def _detection_row(run, molecule, full, reduced, full_nested=None) -> dict:
    name = f"log_vmr_{molecule}"
    cls = classify_abundance(run.samples[name], run.config.free[name])
    ln_b = full.ln_z - reduced["ln_z"]
    return {"molecule": molecule, "ln_bayes_factor": ln_b,
            "ln_bayes_factor_err": math.hypot(full.ln_z_err, reduced["ln_z_err"]),
            "significance_sigma": float(sigma_from_ln_bayes(ln_b)), "abundance_class": cls.label,
            "log_vmr_median": cls.median, "log_vmr_lo": cls.lo, "log_vmr_hi": cls.hi,
            "upper_limit_95": cls.upper_limit_95, "lower_limit_95": cls.lower_limit_95,
            "ln_z_full": full.ln_z, "ln_z_full_err": full.ln_z_err, "ln_z_reduced": reduced["ln_z"],
            "ln_z_reduced_err": reduced["ln_z_err"], "reduced_converged": reduced["converged"],
            "ln_bayes_factor_nested": (full_nested.ln_z - reduced["ln_z_nested"]) if full_nested else math.nan,
            "ln_bayes_factor_nested_err": (math.hypot(full_nested.ln_z_err, reduced["ln_z_nested_err"])
                                           if full_nested else math.nan)}


def detections_table(rows, meta: dict) -> Table:
    t = Table(rows=[[r[c] for c in DETECTION_COLUMNS] for r in rows], names=DETECTION_COLUMNS) if rows else \
        Table(names=DETECTION_COLUMNS, dtype=[str] + [float] * 3 + [str] + [float] * 9 + [bool] + [float] * 2)
    for c in ("log_vmr_median", "log_vmr_lo", "log_vmr_hi", "upper_limit_95", "lower_limit_95"):
        t[c].description = "log10 volume mixing ratio"
    t["log_vmr_lo"].description = "16 % quantile of log10 VMR"
    t["log_vmr_hi"].description = "84 % quantile of log10 VMR"
    t["upper_limit_95"].description = "95 % quantile of log10 VMR (upper-limit class only, else NaN)"
    t.meta.update(meta)
    return t


def bands_table(flags, meta: dict) -> Table:
    t = Table(rows=[[getattr(f, c) for c in BAND_COLUMNS] for f in flags], names=BAND_COLUMNS) if flags else \
        Table(names=BAND_COLUMNS, dtype=[str, str, float, float, float, str, float, str, float, int, float, float])
    for c in ("center_um", "window_lo_um", "window_hi_um"):
        t[c].unit = "um"
    t.meta.update(meta)
    return t


def identify(run_dir, workers: int = 1, max_steps: int | None = None, molecules=None, band_catalogue=None,
             n_proposal: int | None = None, band_draws: int = 60, seed: int = 0, model_factory=None,
             refit: bool = False, nested_live_points: int = 0, proposal: str = "normal") -> IdentifyResult:
    """Detection significance, abundance class and band flags of each molecule of a run.

    Parameters
    ----------
    run_dir : path-like
        A finished run folder (from ``retrieve fit``).
    workers : int
        Processes running the reduced fits in parallel.
    max_steps : int, optional
        Cap on the reduced fits' emcee steps (default: as many steps as the full
        fit took, which has one dimension more).
    molecules : sequence of str, optional
        Subset of the run's free absorbers (default: all).
    band_catalogue : path-like, optional
        User band file merged into the shipped catalogue.
    n_proposal : int, optional
        Proposal draws of bridge sampling (default: as many as posterior samples used).
    band_draws : int
        Posterior draws for the band flags.
    seed : int
        Seed of the evidence and band-flag randomness.
    model_factory : callable, optional
        For runs made with a custom model (passed to ``load_run`` and the reduced fits).
    refit : bool
        Redo reduced fits even if ``RUN_DIR/identify/without_<X>`` holds a finished one.
    nested_live_points : int
        If > 0, also estimate both evidences by nested sampling with dynesty
        (this many live points) as a cross-check: columns ``ln_bayes_factor_nested(_err)``.
    proposal : {"normal", "t", "mixture"}
        Bridge-sampling proposal (see :func:`retrieve.analysis.evidence.bridge_sampling`).

    Returns
    -------
    IdentifyResult
    """
    from ..inference.rundir import load_run, write_table
    if int(workers) < 1:
        raise UserError(f"--workers must be >= 1, got {workers}")
    from .evidence import PROPOSALS
    if proposal not in PROPOSALS:
        raise UserError(f"--proposal must be one of {', '.join(PROPOSALS)}, got {proposal!r}")
    run = load_run(run_dir, model_factory=model_factory)
    run_dir = Path(run_dir)
    available = free_molecules(run)
    skipped = {m: "log VMR fixed in the fit" for m in run.config.model_mapping.get("absorbers", [])
               if m not in available}
    if molecules:
        unknown = [m for m in molecules if m not in available]
        if unknown:
            raise UserError(f"{run_dir}: molecule {unknown[0]!r} has no free log VMR in this run; "
                            f"choose from {available}")
        available = [m for m in available if m in molecules]
    if not available:
        raise UserError(f"{run_dir}: no absorber with a free log VMR; nothing to identify")
    catalogue = load_catalogue(band_catalogue)
    if max_steps is None:
        max_steps = int(run.manifest.get("convergence", {}).get("n_steps") or run.config.sampler.max_steps)
    tasks = [_ReducedTask(reduced_config(run.config, m), run_dir / IDENTIFY_DIR / f"without_{m}", m,
                          max_steps, n_proposal, seed, model_factory, refit, int(nested_live_points), proposal)
             for m in available]
    reduced = _run_reduced(tasks, int(workers))
    for m in available:
        if reduced[m]["reused"]:
            log.info("%s: reusing the finished reduced fit in %s", m, run_dir / IDENTIFY_DIR / f"without_{m}")
    full = _evidence(run, n_proposal, seed, proposal)
    full_nested = (nested_evidence_of_run(run.log_posterior, nlive=int(nested_live_points), seed=seed)
                   if nested_live_points else None)
    rows = [_detection_row(run, m, full, reduced[m], full_nested) for m in available]
    flags = band_flags_of_run(run.log_posterior, run.samples, available, catalogue, n_draws=band_draws, seed=seed)
    meta = {"caveat": CAVEAT, "evidence_method": "bridge sampling (Meng & Wong 1996; Gronau et al. 2017), "
                                                 f"{proposal} proposal on logit/log-transformed parameters",
            "reduced_model": f"log_vmr_<molecule> fixed at {NEGLIGIBLE_LOG_VMR}, all else as in the fit",
            "nested_cross_check": (f"dynesty, {int(nested_live_points)} live points" if nested_live_points
                                   else "not run"),
            "abundance_rule": CLASS_RULE, "seed": int(seed),
            "reduced_runs": {m: str(t.out_dir.relative_to(run_dir)) for m, t in zip(available, tasks)},
            "reduced_reused": {m: bool(reduced[m]["reused"]) for m in available},
            "skipped": skipped}
    det = detections_table(rows, meta)
    band_meta = {"rule": "significance_sigma: median over posterior draws of chi2 = d^T C_B^-1 d (d = full minus "
                         "molecule-removed model in the band's channels, C_B the band covariance), converted with "
                         "|B| degrees of freedom to a two-tailed normal deviate; detected >= 3, tentative 2-3",
                 "channels": "0-based channel indices per dataset where |median d| >= the channel's 1-sigma error",
                 "draws": int(band_draws), "seed": int(seed)}
    bands = bands_table(flags, band_meta)
    write_table(det, run_dir / DETECTIONS)
    write_table(bands, run_dir / BANDS)
    return IdentifyResult(det, bands, run_dir, skipped)
