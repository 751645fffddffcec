"""Sampler checkpoints in HDF5, written atomically.

A checkpoint holds the full sampler state: the chain, ln posterior of every
step, per-walker acceptance counts, the state of emcee's random generator
(so that a resumed run draws the same proposals as an uninterrupted one), the
τ history, the failure counts and a digest of the fit configuration.

Atomic write: the file is written to a temporary name in the same folder,
flushed and ``fsync``-ed, then renamed over the old one with ``os.replace``
(atomic on POSIX) and the folder is ``fsync``-ed.  A ``kill -9`` at any
moment therefore leaves either the previous or the new checkpoint, never a
partial file.

Layout (format ``retrieve-chain``, version 1)::

    /chain           (n_steps, n_walkers, n_dim) float64
    /log_prob        (n_steps, n_walkers) float64
    /accepted        (n_walkers,) int64
    /tau_history     (n_checks, 1 + n_dim) float64: step, τ_1 … τ_n
    /rng/keys        (624,) uint32   MT19937 state of emcee's RandomState
    /proposal/weights, /proposal/means, /proposal/covariances
                     the frozen Gaussian mixture of the "pilot-mixture" moves
                     (only when those moves are used)
    attrs: format, format_version, param_names (JSON), rng_pos, rng_has_gauss,
           rng_cached_gaussian, config_digest, seed, converged, failures (JSON),
           n_evaluations, elapsed_s, pilot (JSON: the pilot run's summary, or {})
    /walkers/positions, /walkers/log_prob
                     the last walker positions and emcee's ln p in sampler
                     coordinates (only with coordinates = "unbounded"; the
                     chain itself is always in physical coordinates)
"""
from __future__ import annotations

import dataclasses
import json
import os
from pathlib import Path

import h5py
import numpy as np

from ..errors import InputFileError
from .mixture import GaussianMixture

FORMAT_NAME = "retrieve-chain"
FORMAT_VERSION = 1


@dataclasses.dataclass
class Checkpoint:
    """Everything needed to continue or analyse a chain."""

    param_names: list[str]
    chain: np.ndarray
    log_prob: np.ndarray
    accepted: np.ndarray
    random_state: tuple
    tau_history: np.ndarray
    config_digest: str = ""
    seed: int = 0
    converged: bool = False
    failures: dict = dataclasses.field(default_factory=dict)
    n_evaluations: int = 0
    elapsed_s: float = 0.0
    proposal: GaussianMixture | None = None
    pilot: dict = dataclasses.field(default_factory=dict)
    walker_positions: np.ndarray | None = None     # sampler coordinates, when they are not physical
    walker_log_prob: np.ndarray | None = None

    def walker_state(self) -> tuple[np.ndarray, np.ndarray]:
        """Last walker positions and ln p in sampler coordinates (where a resumed run continues)."""
        if self.walker_positions is not None:
            return self.walker_positions, self.walker_log_prob
        return self.chain[-1], self.log_prob[-1]

    @property
    def n_steps(self) -> int:
        return int(self.chain.shape[0])

    @property
    def n_walkers(self) -> int:
        return int(self.chain.shape[1])


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory fds
        return
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def write_checkpoint(path: str | os.PathLike, ckpt: Checkpoint) -> Path:
    """Write ``ckpt`` to ``path`` atomically (temporary file, fsync, rename)."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp{os.getpid()}")
    name, keys, pos, has_gauss, cached = ckpt.random_state
    with h5py.File(tmp, "w") as f:
        f.attrs["format"] = FORMAT_NAME
        f.attrs["format_version"] = FORMAT_VERSION
        f.attrs["param_names"] = json.dumps(list(ckpt.param_names))
        f.create_dataset("chain", data=np.asarray(ckpt.chain, dtype=float))
        f.create_dataset("log_prob", data=np.asarray(ckpt.log_prob, dtype=float))
        f.create_dataset("accepted", data=np.asarray(ckpt.accepted, dtype=np.int64))
        f.create_dataset("tau_history", data=np.asarray(ckpt.tau_history, dtype=float).reshape(
            -1, 1 + len(ckpt.param_names)))
        f.create_dataset("rng/keys", data=np.asarray(keys, dtype=np.uint32))
        f.attrs["rng_name"] = str(name)
        f.attrs["rng_pos"] = int(pos)
        f.attrs["rng_has_gauss"] = int(has_gauss)
        f.attrs["rng_cached_gaussian"] = float(cached)
        f.attrs["config_digest"] = ckpt.config_digest
        f.attrs["seed"] = int(ckpt.seed)
        f.attrs["converged"] = bool(ckpt.converged)
        f.attrs["failures"] = json.dumps(dict(ckpt.failures))
        f.attrs["n_evaluations"] = int(ckpt.n_evaluations)
        f.attrs["elapsed_s"] = float(ckpt.elapsed_s)
        f.attrs["pilot"] = json.dumps(dict(ckpt.pilot))
        if ckpt.proposal is not None:
            for key in ("weights", "means", "covariances"):
                f.create_dataset(f"proposal/{key}", data=getattr(ckpt.proposal, key))
        if ckpt.walker_positions is not None:
            f.create_dataset("walkers/positions", data=np.asarray(ckpt.walker_positions, dtype=float))
            f.create_dataset("walkers/log_prob", data=np.asarray(ckpt.walker_log_prob, dtype=float))
        f.flush()
    fd = os.open(tmp, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)
    os.replace(tmp, path)
    _fsync_dir(path.parent)
    return path


def read_checkpoint(path: str | os.PathLike) -> Checkpoint:
    """Read a checkpoint; a missing or unreadable file is a one-line :class:`InputFileError`."""
    path = Path(path)
    if not path.is_file():
        raise InputFileError(f"{path}: no checkpoint found; start the run without --resume")
    try:
        with h5py.File(path, "r") as f:
            if f.attrs.get("format") != FORMAT_NAME:
                raise InputFileError(f"{path}: not a retrieve chain file (format attribute missing)")
            keys = f["rng/keys"][()]
            proposal = None
            if "proposal" in f:
                proposal = GaussianMixture(*(f[f"proposal/{k}"][()] for k in ("weights", "means", "covariances")))
            walkers = (f["walkers/positions"][()], f["walkers/log_prob"][()]) if "walkers" in f else (None, None)
            rs = (str(f.attrs["rng_name"]), keys, int(f.attrs["rng_pos"]),
                  int(f.attrs["rng_has_gauss"]), float(f.attrs["rng_cached_gaussian"]))
            return Checkpoint(
                param_names=json.loads(f.attrs["param_names"]),
                chain=f["chain"][()], log_prob=f["log_prob"][()], accepted=f["accepted"][()],
                random_state=rs, tau_history=f["tau_history"][()],
                config_digest=str(f.attrs["config_digest"]), seed=int(f.attrs["seed"]),
                converged=bool(f.attrs["converged"]), failures=json.loads(f.attrs["failures"]),
                n_evaluations=int(f.attrs["n_evaluations"]), elapsed_s=float(f.attrs["elapsed_s"]),
                proposal=proposal, pilot=json.loads(f.attrs.get("pilot", "{}")),
                walker_positions=walkers[0], walker_log_prob=walkers[1])
    except (OSError, KeyError) as exc:
        raise InputFileError(f"{path}: unreadable chain file ({exc}); start again with --overwrite") from None


def remove_stale_temporaries(path: str | os.PathLike) -> None:
    """Delete temporary files left by a checkpoint write that was killed."""
    path = Path(path)
    for tmp in path.parent.glob(f".{path.name}.tmp*"):
        tmp.unlink(missing_ok=True)
