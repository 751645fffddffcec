"""Inference: fit configuration, priors, likelihood and noise kernels, the emcee driver, checkpoints, run folders.

Library entry points: :func:`fit` (what ``retrieve fit`` runs), :func:`load_run`
(open a run folder), :func:`load_config` (validate a fit configuration).
"""
from .config import FitConfig, load_config, parse_config
from .rundir import Run, load_run
from .run import RunResult, fit

__all__ = ["FitConfig", "load_config", "parse_config", "fit", "RunResult", "load_run", "Run"]
