"""Batch retrievals: every catalogue object is one task on Dask distributed.

:func:`run_survey` (what ``retrieve batch`` calls) reads the catalogue
(:mod:`retrieve.survey.catalogue`), builds each object's configuration, and
submits :func:`run_object` once per object to a Dask cluster:

* a :class:`distributed.LocalCluster` by default (``workers`` processes with
  one thread each, bound to 127.0.0.1, no dashboard);
* an existing scheduler (``scheduler="tcp://host:8786"``, ``--scheduler``);
* SLURM or PBS jobs through dask-jobqueue (``[survey] cluster = "slurm"``
  or ``"pbs"``; optional dependency).

With a remote scheduler or batch jobs, the workers must be able to import
``retrieve`` and to read and write the same paths as the client (catalogue,
spectra, opacity tables, ``SURVEY_DIR`` on a shared filesystem).

Layout of ``SURVEY_DIR``::

    <object>/                 the object's run folder, exactly as ``retrieve fit --out`` writes it
    <object>/completed.json   written atomically after the run folder is complete
    <object>/error.txt        the error of the last attempt, if it failed
    _logs/<object>.log        the object's log (all attempts, appended)
    survey_status.ecsv        one row per object: status, error, timing (rewritten as tasks finish, ≤ every 5 s)
    survey_summary.ecsv       one row per object: status, key parameters (median, p16, p84),
                              detections and band depths where available
    survey_band_depths.png    water against methane index, one point per finished object
    survey.json               inputs, cluster, timing

Re-running the same command skips objects with ``completed.json`` (when it
matches their current configuration and spectra), resumes objects whose run
folder holds a checkpoint (``chain.h5``), and retries failed ones.  A failing
object (bad spectrum, configuration error, crashed worker) is recorded and
does not stop the others.

``[survey]`` keys (all optional; in the fit TOML, ignored by ``retrieve fit``):

* ``cluster``: ``"local"`` (default), ``"slurm"`` or ``"pbs"``
* ``workers``: local: worker processes (default: CPU count); slurm/pbs: jobs
* ``scheduler``: address of a running Dask scheduler (as ``--scheduler``)
* ``queue``: batch queue / partition
* ``account``: account / project charged
* ``walltime``: job wall time, e.g. ``"02:00:00"``
* ``cores_per_job``: cores of one job (default 1); one single-threaded worker per core
* ``memory_per_job``: memory of one job, e.g. ``"4GB"`` (default ``"2GB"``)
* ``job_directives``: extra ``#SBATCH`` / ``#PBS`` lines (list of strings)
* ``job_setup``: shell lines run before the worker starts (list of strings)
* ``python``: interpreter on the compute nodes (default: this one)
* ``scratch_dir``: node-local folder for worker spill files
* ``identify``: after each fit, run the identification step
  (:func:`retrieve.analysis.identify.identify`: one reduced fit per free
  absorber, Bayes factors, band flags) so that the summary has detections
  (as ``--identify``; default false)
"""
from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import math
import os
import sys
import time
import tomllib
import traceback
import warnings
from pathlib import Path

import numpy as np
from astropy.table import Table

from ..config_keys import check_keys, expect_type
from ..errors import ConfigError, UserError
from .catalogue import CatalogueEntry, object_config, read_catalogue
from .progress import LOG_DIR, SurveyProgress, announce, now_utc, object_log

COMPLETED = "completed.json"
ERROR = "error.txt"
STATUS = "survey_status.ecsv"
SUMMARY = "survey_summary.ecsv"
FIGURE = "survey_band_depths.png"
SURVEY_JSON = "survey.json"
RESERVED = {STATUS, SUMMARY, FIGURE, SURVEY_JSON}
STATUS_EVERY_S = 5.0  # rewrite the status table at most this often while tasks finish (and at the end)
CLUSTERS = ("local", "slurm", "pbs")
SURVEY_TYPES = {
    "cluster": str, "workers": int, "scheduler": str, "queue": str, "account": str, "walltime": str,
    "cores_per_job": int, "memory_per_job": str, "job_directives": list, "job_setup": list, "python": str,
    "scratch_dir": str, "identify": bool,
}


# --------------------------------------------------------------------------- [survey] settings
@dataclasses.dataclass(frozen=True)
class SurveySettings:
    """The ``[survey]`` table (see the module docstring)."""

    cluster: str = "local"
    workers: int | None = None
    scheduler: str | None = None
    queue: str | None = None
    account: str | None = None
    walltime: str | None = None
    cores_per_job: int = 1
    memory_per_job: str = "2GB"
    job_directives: tuple = ()
    job_setup: tuple = ()
    python: str | None = None
    scratch_dir: str | None = None
    identify: bool = False


def survey_settings(mapping, where: str) -> SurveySettings:
    """Validate a ``[survey]`` table into :class:`SurveySettings` (one-line :class:`ConfigError`)."""
    where = f"{where} [survey]"
    if not isinstance(mapping, dict):
        raise ConfigError(f"{where}: must be a table")
    check_keys(mapping, SURVEY_TYPES, where)
    values = {k: expect_type(v, SURVEY_TYPES[k], where, k) for k, v in mapping.items()}
    if values.get("cluster", "local") not in CLUSTERS:
        raise ConfigError(f"{where}: cluster {values['cluster']!r} unknown; choose one of {', '.join(CLUSTERS)}")
    for key in ("workers", "cores_per_job"):
        if key in values and values[key] < 1:
            raise ConfigError(f"{where}: {key!r} must be >= 1, got {values[key]}")
    for key in ("job_directives", "job_setup"):
        if key in values:
            if not all(isinstance(x, str) for x in values[key]):
                raise ConfigError(f"{where}: {key!r} must be a list of strings")
            values[key] = tuple(values[key])
    return SurveySettings(**values)


def read_survey_settings(config_path) -> SurveySettings:
    """``[survey]`` of a fit TOML file (defaults when absent)."""
    path = Path(config_path)
    try:
        mapping = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ConfigError(f"{path}: cannot read ({exc})") from None
    return survey_settings(mapping.get("survey", {}), str(path))


# --------------------------------------------------------------------------- one object (runs on a worker)
@dataclasses.dataclass(frozen=True)
class ObjectTask:
    """Everything a worker needs to fit one object (picklable)."""

    name: str
    config: object            # FitConfig, or None if building it failed
    spectra: tuple
    run_dir: Path
    log_path: Path
    fingerprint: str
    max_steps: int | None = None
    setup_error: str = ""     # a configuration problem found on the client
    identify: bool = False    # run the identification step after the fit


def fingerprint(config, spectra) -> str:
    """sha256 of what decides an object's result: configuration digest, spectrum names and contents."""
    h = hashlib.sha256(config.digest.encode())
    for item in spectra:
        h.update(str(item).encode())
        path = Path(str(item).split("=", 1)[-1]) if not os.path.exists(str(item)) else Path(str(item))
        if path.is_file():
            h.update(hashlib.sha256(path.read_bytes()).hexdigest().encode())
    return h.hexdigest()


def _write_error(run_dir: Path, message: str, detail: str = "") -> None:
    from ..observations.writers import atomic_write_text
    run_dir.mkdir(parents=True, exist_ok=True)
    atomic_write_text(run_dir / ERROR, message.strip() + "\n" + (("\n" + detail) if detail else ""), overwrite=True)


def _read_marker(run_dir: Path) -> dict | None:
    try:
        return json.loads((run_dir / COMPLETED).read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return None


def _start_mode(run_dir: Path) -> str:
    """``fresh``, ``resume`` (a checkpoint exists) or ``overwrite`` (an incomplete run without one)."""
    from ..inference import rundir
    if (run_dir / rundir.CHAIN).is_file():
        return "resume"
    if run_dir.is_dir() and any(run_dir.iterdir()):
        return "overwrite"
    return "fresh"


def run_object(task: ObjectTask) -> dict:
    """Fit one object into its run folder; never raises for a failing object.

    Returns
    -------
    dict
        ``object``, ``status`` ("finished" / "failed"), ``skipped``, ``resumed``,
        ``error`` (one line), ``elapsed_s``, ``cpu_s`` (this process's CPU time), ``finished_utc``,
        ``converged``, ``n_steps``.
    """
    from ..inference import rundir
    from ..inference.run import fit

    t0, cpu0 = time.monotonic(), time.process_time()
    out = {"object": task.name, "status": "failed", "skipped": False, "resumed": False, "error": "",
           "elapsed_s": 0.0, "cpu_s": 0.0, "finished_utc": "", "converged": None, "n_steps": None}
    run_dir = Path(task.run_dir)
    marker = _read_marker(run_dir)
    fitted = False
    if marker is not None:
        if marker.get("fingerprint") != task.fingerprint:
            out["error"] = (f"{run_dir}: finished earlier with a different configuration or spectra; "
                            f"remove the folder to fit it again")
            return out
        if not task.identify or marker.get("identified"):
            return {**out, "status": "finished", "skipped": True, "finished_utc": marker.get("finished_utc", ""),
                    "converged": marker.get("converged"), "n_steps": marker.get("n_steps")}
        fitted = True  # finished before without identification: only that is left to do
    announce(task.name, "running")
    with object_log(task.log_path, task.name) as log, warnings.catch_warnings():
        warnings.simplefilter("always")
        log.info("---- %s: attempt started on pid %d", task.name, os.getpid())
        try:
            if task.setup_error:
                raise UserError(task.setup_error)
            (run_dir / ERROR).unlink(missing_ok=True)
            if fitted:
                out.update(converged=marker.get("converged"), n_steps=marker.get("n_steps"))
            else:
                mode = _start_mode(run_dir)
                log.info("run folder %s: %s", run_dir, {"fresh": "new run", "resume": "resuming the checkpoint",
                                                         "overwrite": "replacing an incomplete run"}[mode])
                result = fit(task.config, spectra=list(task.spectra), out_dir=run_dir, workers=1,
                             max_steps=task.max_steps, resume=mode == "resume", overwrite=mode == "overwrite",
                             progress=False)
                out.update(resumed=mode == "resume", converged=bool(result.converged), n_steps=int(result.n_steps))
                log.info("fit: %s after %d steps (%.1f s)", "converged" if result.converged else "NOT converged",
                         result.n_steps, time.monotonic() - t0)
            if task.identify:
                from ..analysis.identify import identify
                ident = identify(run_dir, workers=1, max_steps=task.max_steps)
                log.info("identification: %d molecules -> detections.ecsv, bands.ecsv", len(ident.detections))
            out.update(status="finished", finished_utc=now_utc())
            rundir.write_json(run_dir / COMPLETED, {"object": task.name, "fingerprint": task.fingerprint,
                                                    "finished_utc": out["finished_utc"], "identified": task.identify,
                                                    "converged": out["converged"], "n_steps": out["n_steps"]})
            log.info("finished (%.1f s)", time.monotonic() - t0)
        except Exception as exc:  # any failure of this object is recorded; the survey goes on
            first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            out["error"] = first if isinstance(exc, UserError) else f"{type(exc).__name__}: {first}"
            detail = "" if isinstance(exc, UserError) else traceback.format_exc()
            _write_error(run_dir, out["error"], detail)
            log.error("failed: %s\n%s", out["error"], detail)
    out["elapsed_s"] = time.monotonic() - t0
    out["cpu_s"] = time.process_time() - cpu0  # elapsed ≫ cpu means the node's cores are oversubscribed
    announce(task.name, "ended", status=out["status"])
    return out


# --------------------------------------------------------------------------- the cluster
@contextlib.contextmanager
def survey_client(settings: SurveySettings, workers: int | None = None, scheduler: str | None = None):
    """A :class:`distributed.Client` for the survey (closed, with its cluster, on exit).

    ``scheduler`` (or ``[survey] scheduler``) connects to a running scheduler;
    otherwise a local or dask-jobqueue cluster is started.
    """
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise UserError("retrieve batch needs Dask distributed; install it with "
                        "'pip install \"dask[distributed]\"'") from None
    address = scheduler or settings.scheduler
    n = workers or settings.workers
    if address:
        try:
            client = Client(address, timeout="30s", set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise UserError(f"--scheduler {address}: cannot connect ({exc}); start the scheduler or check "
                            f"the address") from None
        with client:
            yield client
        return
    if settings.cluster == "local":
        n = n or os.cpu_count() or 1
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, host="127.0.0.1", dashboard_address=None,
                               processes=True, silence_logs=40)
    else:
        cluster = jobqueue_cluster(settings)
        cluster.scale(jobs=n or 1)
    with cluster, Client(cluster, set_as_default=False) as client:
        yield client


def jobqueue_cluster(settings: SurveySettings):
    """A dask-jobqueue SLURM / PBS cluster from ``[survey]`` (one single-threaded worker per job)."""
    try:
        import dask_jobqueue
    except ImportError:
        raise UserError(f"[survey] cluster = {settings.cluster!r} needs dask-jobqueue; install it with "
                        f"'pip install dask-jobqueue' on this machine and the compute nodes") from None
    kind = {"slurm": dask_jobqueue.SLURMCluster, "pbs": dask_jobqueue.PBSCluster}[settings.cluster]
    return kind(**jobqueue_options(settings))


def jobqueue_options(settings: SurveySettings) -> dict:
    """Keyword arguments for dask-jobqueue's cluster classes from our ``[survey]`` keys."""
    # one single-threaded worker process per core: each task is one single-process fit
    kw = {"cores": settings.cores_per_job, "processes": settings.cores_per_job, "memory": settings.memory_per_job,
          "job_extra_directives": list(settings.job_directives), "job_script_prologue": list(settings.job_setup),
          "python": settings.python or sys.executable}
    for ours, theirs in (("queue", "queue"), ("walltime", "walltime"), ("scratch_dir", "local_directory")):
        if getattr(settings, ours):
            kw[theirs] = getattr(settings, ours)
    if settings.account:
        kw["account"] = settings.account
    return kw


# --------------------------------------------------------------------------- the survey
@dataclasses.dataclass
class SurveyResult:
    """What :func:`run_survey` returns (also written to ``SURVEY_DIR``)."""

    out_dir: Path
    status: Table
    summary: Table
    figure: Path | None
    elapsed_s: float
    dispatch_s: float = math.nan   # first submission to last result
    summary_s: float = math.nan    # summary table and figure

    @property
    def n_failed(self) -> int:
        return int(np.sum(np.asarray(self.status["status"]) != "finished"))


def build_tasks(entries: list[CatalogueEntry], config_path, out_dir: Path, max_steps=None,
                catalogue_name: str = "catalogue", identify: bool = False) -> list[ObjectTask]:
    """One :class:`ObjectTask` per entry; an object whose configuration fails carries the error."""
    from ..inference.config import load_config
    base = load_config(config_path)
    tasks = []
    for e in entries:
        if e.name in RESERVED:
            raise UserError(f"{catalogue_name} row {e.row}: object name {e.name!r} is reserved for a survey file; "
                            f"rename it")
        run_dir = out_dir / e.name
        log_path = out_dir / LOG_DIR / f"{e.name}.log"
        try:
            cfg = object_config(load_config(e.config) if e.config else base, e, catalogue_name)
            fp = fingerprint(cfg, e.spectra)
            tasks.append(ObjectTask(e.name, cfg, e.spectra, run_dir, log_path, fp, max_steps, identify=identify))
        except UserError as exc:
            tasks.append(ObjectTask(e.name, None, e.spectra, run_dir, log_path, "", max_steps, str(exc), identify))
    return tasks


def _crash_outcome(task: ObjectTask, exc: BaseException) -> dict:
    """Outcome of a task whose worker died or that could not run at all."""
    msg = f"{type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else 'task lost'}"
    with contextlib.suppress(OSError):
        _write_error(Path(task.run_dir), msg)
    return {"object": task.name, "status": "failed", "skipped": False, "resumed": False, "error": msg,
            "elapsed_s": math.nan, "finished_utc": ""}


def run_survey(catalogue, config, out_dir, workers: int | None = None, scheduler: str | None = None,
               max_steps: int | None = None, client=None, stream=sys.stderr,
               identify: bool | None = None) -> SurveyResult:
    """Fit every catalogue object on Dask and write the survey folder.

    Parameters
    ----------
    catalogue : path-like
        Survey catalogue (ECSV; :mod:`retrieve.survey.catalogue`).
    config : path-like
        Fit configuration (TOML) used for every object without its own.
    out_dir : path-like
        ``SURVEY_DIR``; created if needed, reused on a re-run.
    workers : int, optional
        Local worker processes (or jobs); default ``[survey] workers`` or the CPU count.
    scheduler : str, optional
        Address of a running Dask scheduler.
    max_steps : int, optional
        Override ``[sampler] max_steps`` of every object.
    client : distributed.Client, optional
        Use this client instead of starting a cluster.
    stream : file-like or None
        Progress lines (None: silent).
    identify : bool, optional
        Run the identification step after each fit (default ``[survey] identify``).

    Returns
    -------
    SurveyResult
    """
    t0 = time.monotonic()
    catalogue, config, out = Path(catalogue), Path(config), Path(out_dir)
    if workers is not None and workers < 1:
        raise UserError(f"--workers must be >= 1, got {workers}")
    settings = read_survey_settings(config)
    entries = read_catalogue(catalogue)
    if out.exists() and not out.is_dir():
        raise UserError(f"{out}: exists and is not a folder; choose another --out")
    out.mkdir(parents=True, exist_ok=True)
    identify = settings.identify if identify is None else bool(identify)
    tasks = build_tasks(entries, config, out, max_steps, str(catalogue), identify)
    progress = SurveyProgress([t.name for t in tasks], stream=stream)
    info = {"catalogue": str(catalogue.resolve()), "config": str(config.resolve()), "objects": len(tasks),
            "started_utc": now_utc(), "max_steps": max_steps, "identify": identify}
    with contextlib.ExitStack() as stack:
        if client is None:
            client = stack.enter_context(survey_client(settings, workers, scheduler))
        info["scheduler"] = client.scheduler.address
        info["workers"] = _n_workers(client)
        _write_json(out / SURVEY_JSON, {**info, "status": "running"})
        t_dispatch = time.monotonic()
        _dispatch(client, tasks, progress, out)
        dispatch_s = time.monotonic() - t_dispatch
    t_summary = time.monotonic()
    status = progress.table()
    _write_table(status, out / STATUS)
    from .summary import survey_summary, survey_figure
    summary = survey_summary(status, out, entries)
    _write_table(summary, out / SUMMARY)
    figure = survey_figure(summary, out / FIGURE)
    summary_s = time.monotonic() - t_summary
    elapsed = time.monotonic() - t0
    _write_json(out / SURVEY_JSON, {**info, "status": "finished", "finished_utc": now_utc(), "wall_time_s": elapsed,
                                    "dispatch_s": dispatch_s, "summary_s": summary_s, "counts": progress.counts()})
    return SurveyResult(out, status, summary, figure, elapsed, dispatch_s, summary_s)


def _n_workers(client) -> int:
    try:
        workers = client.scheduler_info(n_workers=-1).get("workers", {})
    except TypeError:  # distributed before the n_workers argument (it listed all workers then)
        workers = client.scheduler_info().get("workers", {})
    return len(workers)


def _dispatch(client, tasks: list[ObjectTask], progress: SurveyProgress, out: Path) -> None:
    """Submit every task, follow them to the end, rewrite the status table as they finish.

    The table is rewritten at most every :data:`STATUS_EVERY_S` seconds: a
    rewrite costs O(objects), and a survey of hundreds finishing quickly
    would otherwise spend its client's time writing tables.
    """
    from distributed import as_completed
    from .progress import TOPIC
    client.subscribe_topic(TOPIC, progress.handle_event)
    try:
        futures = {}
        for i, t in enumerate(tasks):
            # pure=False and a unique key: a re-run must run again (and not reuse a cached result)
            fut = client.submit(run_object, t, key=f"retrieve-object-{t.name}-{os.getpid()}-{time.time_ns()}",
                                pure=False, priority=-i, retries=0)
            futures[fut] = t
        last_write = -math.inf
        for fut in as_completed(list(futures), loop=client.loop):
            task = futures[fut]
            try:
                outcome = fut.result()
            except Exception as exc:  # worker died (KilledWorker), cancelled, ...
                outcome = _crash_outcome(task, exc)
            progress.done(task.name, outcome)
            if time.monotonic() - last_write >= STATUS_EVERY_S:
                _write_table(progress.table(), out / STATUS)
                last_write = time.monotonic()
    finally:
        with contextlib.suppress(Exception):
            client.unsubscribe_topic(TOPIC)


def _write_table(table: Table, path: Path) -> None:
    from ..inference import rundir
    rundir.write_table(table, path)


def _write_json(path: Path, obj) -> None:
    from ..inference import rundir
    rundir.write_json(path, obj)
