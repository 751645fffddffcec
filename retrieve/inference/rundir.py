"""The run folder: file names, safe creation, atomic writes, the manifest, and :func:`load_run`.

Layout (see DEVELOPERS.md, "Run folder")::

    RUN_DIR/
      config.toml                 the fit configuration as given (text)
      data/<dataset>.ecsv         the datasets actually fitted (internal units)
      chain.h5                    checkpoint + full chain (retrieve.inference.checkpoint)
      posterior_samples.ecsv      after burn-in and thinning; free + derived quantities + ln p
      summary.ecsv, summary.json  median, 16/84 and 2.5/97.5 percentiles, MAP
      spectrum_<dataset>.ecsv     data, best-fit model and posterior-predictive percentiles
      manifest.json               configuration, checksums, versions, seed, timing, diagnostics

Every file is written to a temporary name, fsync-ed and renamed; an existing
run folder is never reused unless ``overwrite`` (or ``resume``) is asked for.
"""
from __future__ import annotations

import dataclasses
import hashlib
import io
import json
import os
import platform
import shutil
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

import numpy as np
from astropy.table import Table

from ..errors import InputFileError, UserError
from ..observations.writers import atomic_write_text

CONFIG = "config.toml"
DATA_DIR = "data"
CHAIN = "chain.h5"
SAMPLES = "posterior_samples.ecsv"
SUMMARY_ECSV = "summary.ecsv"
SUMMARY_JSON = "summary.json"
MANIFEST = "manifest.json"
SPECTRUM = "spectrum_{name}.ecsv"

_RUN_MARKERS = (CHAIN, MANIFEST, CONFIG)
PACKAGES = ("retrieve-atmo", "numpy", "scipy", "astropy", "emcee", "h5py", "tqdm", "speclite", "dynesty")


def prepare_run_dir(out_dir, overwrite: bool = False, resume: bool = False) -> Path:
    """Create (or, with ``overwrite``, empty) a run folder; with ``resume`` it must be a started run.

    A run killed before its first chain checkpoint (during the optimiser or
    the pilot) has a manifest but no chain; ``resume`` accepts it and the
    sampler repeats the start stage (a saved pilot continues).

    Raises
    ------
    UserError
        The folder exists and holds files but neither ``overwrite`` nor
        ``resume`` was given; ``overwrite`` on a folder that is not a run folder;
        ``resume`` of a folder holding neither a checkpoint nor a manifest.
    """
    out = Path(out_dir)
    if resume:
        if not (out / CHAIN).is_file() and not (out / MANIFEST).is_file():
            raise UserError(f"{out}: no {CHAIN} to resume from; start the run without --resume")
        return out
    if out.exists() and not out.is_dir():
        raise UserError(f"{out}: exists and is not a folder; choose another --out")
    if out.is_dir() and any(out.iterdir()):
        if not overwrite:
            raise UserError(f"{out}: run folder exists; use --overwrite to replace it, --resume to "
                            f"continue it, or choose another --out")
        if not any((out / m).exists() for m in _RUN_MARKERS):
            raise UserError(f"{out}: is not a run folder (no {MANIFEST} or {CHAIN}); refusing to overwrite it")
        shutil.rmtree(out)
    out.mkdir(parents=True, exist_ok=True)
    return out


def write_text(path, text: str) -> Path:
    """Atomic text write (replacing any existing file)."""
    atomic_write_text(Path(path), text, overwrite=True)
    return Path(path)


def write_table(table: Table, path) -> Path:
    """Atomic ECSV write."""
    buf = io.StringIO()
    table.write(buf, format="ascii.ecsv")
    return write_text(path, buf.getvalue())


def write_json(path, obj) -> Path:
    return write_text(path, json.dumps(obj, indent=2, default=_json_default) + "\n")


def _json_default(obj):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, np.ndarray):
        return [_json_default(x) if isinstance(x, (np.floating, np.integer)) else x for x in obj.tolist()]
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"not JSON serialisable: {type(obj).__name__}")


def sha256_file(path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def package_versions() -> dict:
    out = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = None
    return out


def opacity_checksums(model) -> dict:
    """``{table name: {"path", "checksum"}}`` of the model's opacity tables (empty for toy models)."""
    opacity = getattr(model, "opacity", None)
    if opacity is None:
        return {}
    out = {}
    for group in ("molecular", "cia"):
        for name, table in getattr(opacity, group, {}).items():
            out[name] = {"path": str(table.path) if table.path else None, "checksum": table.checksum}
    return out


def read_json(path) -> dict:
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: not found; is this a run folder?")
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputFileError(f"{path}: unreadable JSON ({exc})") from None


# --------------------------------------------------------------------------- loading a run
@dataclasses.dataclass
class Run:
    """A finished (or checkpointed) run folder, for analysis, plotting and reports.

    Attributes are loaded on first access; see :func:`load_run`.
    """

    run_dir: Path
    manifest: dict
    model_factory: object = None
    _cache: dict = dataclasses.field(default_factory=dict, repr=False)

    def _get(self, key, build):
        if key not in self._cache:
            self._cache[key] = build()
        return self._cache[key]

    @property
    def config(self):
        """The :class:`~retrieve.inference.config.FitConfig` of the run."""
        from .config import parse_config
        import tomllib

        def build():
            text = (self.run_dir / CONFIG).read_text(encoding="utf-8")
            base = Path(self.manifest.get("config_base_dir") or self.run_dir)
            cfg = parse_config(tomllib.loads(text), where=str(self.run_dir / CONFIG), base_dir=base, text=text,
                               source=self.run_dir / CONFIG)
            # the datasets actually fitted (including command-line ones) with their noise switches
            from .config import DatasetConfig
            ds = tuple(DatasetConfig(name=d["name"], file=self.run_dir / d["copy"],
                                     scale=d["scale"], inflate_errors=d["inflate_errors"],
                                     correlated_noise=d["correlated_noise"])
                       for d in self.manifest["datasets"])
            return cfg.replace(datasets=ds)
        return self._get("config", build)

    @property
    def object_data(self):
        """The fitted datasets (:class:`~retrieve.observations.ObjectData`)."""
        from ..observations import ObjectData
        from ..observations.readers import read_dataset

        def build():
            ds = [read_dataset(self.run_dir / d["copy"], name=d["name"]) for d in self.manifest["datasets"]]
            return ObjectData(self.manifest.get("object", "object"), ds)
        return self._get("object_data", build)

    @property
    def log_posterior(self):
        """The :class:`~retrieve.inference.likelihood.LogPosterior` (callable on a free-parameter vector)."""
        from .run import build_posterior
        return self._get("log_posterior", lambda: build_posterior(self.config, self.object_data,
                                                                   self.model_factory)[0])

    @property
    def forward_model(self):
        """The forward model, rebuilt from the configuration and the fitted datasets."""
        return self.log_posterior.model

    @property
    def param_names(self) -> list[str]:
        return list(self.manifest["param_names"])

    @property
    def samples(self) -> Table:
        """Posterior samples after burn-in and thinning (free + derived + ``log_prob``)."""
        return self._get("samples", lambda: Table.read(self.run_dir / SAMPLES, format="ascii.ecsv"))

    @property
    def summary(self) -> Table:
        return self._get("summary", lambda: Table.read(self.run_dir / SUMMARY_ECSV, format="ascii.ecsv"))

    @property
    def checkpoint(self):
        from .checkpoint import read_checkpoint
        return self._get("checkpoint", lambda: read_checkpoint(self.run_dir / CHAIN))

    @property
    def chain(self) -> np.ndarray:
        """Full chain (n_steps, n_walkers, n_dim), burn-in included."""
        return self.checkpoint.chain

    @property
    def log_prob(self) -> np.ndarray:
        return self.checkpoint.log_prob

    @property
    def map_parameters(self) -> dict:
        """All parameters (fixed and free) at the maximum a posteriori sample."""
        return dict(self.manifest["map_parameters"])

    def spectrum(self, dataset: str) -> Table:
        """Data, best-fit and posterior-predictive percentiles of one dataset."""
        return Table.read(self.run_dir / SPECTRUM.format(name=dataset), format="ascii.ecsv")

    @property
    def dataset_names(self) -> list[str]:
        return [d["name"] for d in self.manifest["datasets"]]


def load_run(run_dir, model_factory=None) -> Run:
    """Open a run folder written by :func:`retrieve.inference.run.fit`.

    Parameters
    ----------
    run_dir : path-like
    model_factory : callable, optional
        ``factory(object_data) -> model``; needed only for runs made with a
        custom (non-ForwardModel) model.  Default: rebuild the
        :class:`~retrieve.forward_model.ForwardModel` from ``[model]``.
    """
    run_dir = Path(run_dir)
    manifest = read_json(run_dir / MANIFEST)
    if model_factory is None and manifest.get("model_factory", "ForwardModel") != "ForwardModel":
        raise UserError(f"{run_dir}: run used the custom model {manifest['model_factory']!r}; "
                        f"pass model_factory= to load_run")
    return Run(run_dir=run_dir, manifest=manifest, model_factory=model_factory)


def remove(path) -> None:
    """Delete a file if present (used when a run is restarted)."""
    try:
        os.unlink(path)
    except FileNotFoundError:
        pass
