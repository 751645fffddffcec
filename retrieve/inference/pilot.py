"""Nested-sampling pilot run: a global look at the posterior before the ensemble starts.

With ``[sampler] pilot = "nested"`` the walkers do not start in a ball
around one optimum.  A short nested-sampling run (Skilling 2006, Bayesian
Analysis 1, 833; implemented by dynesty, Speagle 2020, MNRAS 493, 3132,
with random-walk proposals inside multi-ellipsoid bounds) explores the whole
prior volume, so it finds separated modes and the far ends of degeneracy
ridges that a local start would need thousands of steps to reach.  Its
weighted dead points are resampled to equal weight; the walkers start on
distinct resampled points, and a Gaussian mixture fitted to them is the
proposal of the "pilot-mixture" moves (:mod:`retrieve.inference.moves`).

The pilot's settings are loose on purpose (``pilot_live_points`` = 200,
stopping at ``pilot_dlogz`` = 1): its samples only place the walkers and
shape a proposal, and the emcee chain that follows is what the results are
drawn from.  The pilot's ln Z is recorded in the manifest as a by-product,
not as an evidence to compare models with (use ``retrieve identify``).
"""
from __future__ import annotations

import dataclasses
import math
import os
import warnings

import numpy as np

# ln L handed to dynesty for points where the model fails (it needs a finite number)
_LOG_FLOOR = -1.0e300


def log_likelihood_of(posterior, theta) -> float:
    """ln L(θ) = ln p(θ | d) − ln π(θ) from ``posterior.evaluate``; failures → a very low value."""
    lp, _ = posterior.evaluate(theta)
    if not math.isfinite(lp):
        return _LOG_FLOOR
    return lp - posterior.log_prior(theta)


# the posterior of a serial pilot (pool workers hold their own, see sampler.EvaluationMap)
_LOCAL_POSTERIOR = None


class _LogLikelihood:
    """Picklable ln L that carries no posterior: it uses the worker's, or the serial run's.

    Holding no state keeps dynesty's per-task pickles and its saved state
    small, and a restored pilot needs nothing re-attached.
    """

    def __call__(self, theta):
        from . import sampler
        in_worker = sampler._WORKER_POSTERIOR is not None or sampler._WORKER_ERROR is not None
        post = sampler.worker_posterior() if in_worker else _LOCAL_POSTERIOR
        return log_likelihood_of(post, np.asarray(theta, dtype=float))


class PriorTransform:
    """Unit hypercube → parameters through each prior's inverse CDF."""

    def __init__(self, priors):
        self.priors = list(priors)

    def __call__(self, u):
        return np.array([float(p.transform(ui)) for p, ui in zip(self.priors, u)])


@dataclasses.dataclass
class PilotResult:
    """Equal-weight posterior sample of the pilot run and its bookkeeping."""

    samples: np.ndarray          # (n, ndim), equal weight, with repeats
    ln_z: float
    ln_z_err: float
    n_calls: int
    n_unique: int

    def summary(self) -> dict:
        return {"method": "nested sampling (dynesty)", "ln_z": self.ln_z, "ln_z_err": self.ln_z_err,
                "likelihood_calls": self.n_calls, "distinct_samples": self.n_unique}


class _SerialMap:
    """A pool stand-in evaluating in this process (dynesty asks for ``map``)."""

    def map(self, func, items):
        return [func(x) for x in items]


#: points dynesty proposes at a time (one per worker with up to this many workers)
QUEUE_SIZE = 4
#: seconds between saves of the pilot's state (``state_file``)
CHECKPOINT_EVERY_S = 30.0


class _PilotProgress:
    """dynesty ``print_func`` feeding our own progress bar: iterations, calls and remaining Δ ln Z."""

    def __init__(self, dlogz: float):
        from tqdm.auto import tqdm
        self.bar = tqdm(desc="pilot (nested sampling)", unit="it", dynamic_ncols=True)
        self.dlogz = dlogz

    def __call__(self, results, niter, ncall, dlogz=None, **_):
        self.bar.update(max(0, niter - self.bar.n))
        remaining = getattr(results, "delta_logz", float("nan"))
        self.bar.set_postfix(calls=ncall, remaining_dlnz=f"{remaining:.2f}>{self.dlogz:g}", refresh=False)

    def close(self):
        self.bar.close()


def run_pilot(posterior, live_points: int, dlogz: float, seed: int, pool=None,
              n_resample: int = 20000, progress: bool = False, state_file=None,
              resume: bool = False) -> PilotResult:
    """Run the nested-sampling pilot and resample its dead points to equal weight.

    Parameters
    ----------
    posterior : LogPosterior
        Offers ``priors``, ``ndim``, ``evaluate`` and ``log_prior``.
    live_points, dlogz : int, float
        dynesty ``nlive`` and stopping criterion.
    seed : int
        Seeds dynesty's generator and the resampling: same seed, same pilot.
    pool : multiprocessing pool whose workers hold the posterior, optional
        (see :func:`retrieve.inference.sampler.EvaluationMap`); ``None`` runs serially.
        dynesty queues :data:`QUEUE_SIZE` proposals either way, so the result
        does not depend on the pool.
    n_resample : int
        Size of the equal-weight resample.
    progress : bool
        Show a progress bar (iterations, likelihood calls, remaining Δ ln Z).
    state_file : path, optional
        dynesty saves its state here every :data:`CHECKPOINT_EVERY_S` seconds
        (written to a temporary name and renamed).
    resume : bool
        Continue from ``state_file`` when it exists; the pilot then ends as
        the uninterrupted one would.
    """
    import dynesty

    global _LOCAL_POSTERIOR
    mapper = pool if pool is not None else _SerialMap()
    state = str(state_file) if state_file is not None else None
    restored = bool(resume and state and os.path.isfile(state))
    bar = None
    _LOCAL_POSTERIOR = posterior        # dynesty evaluates the first live points while it is built
    try:
        if restored:
            with warnings.catch_warnings():      # dynesty notes that it keeps the saved queue size
                warnings.simplefilter("ignore")
                sampler = dynesty.NestedSampler.restore(state, pool=mapper)
        else:
            # the same queue with or without workers: dynesty's proposals, hence the pilot, do not
            # depend on the worker count (a serial run maps in this process)
            sampler = dynesty.NestedSampler(_LogLikelihood(), PriorTransform(posterior.priors), posterior.ndim,
                                            nlive=int(live_points), sample="rwalk", bound="multi",
                                            rstate=np.random.default_rng(seed), pool=mapper,
                                            queue_size=QUEUE_SIZE)
        bar = _PilotProgress(float(dlogz)) if progress else None
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*resuming a finished static run.*")
            sampler.run_nested(dlogz=float(dlogz), print_progress=bar is not None, print_func=bar,
                               checkpoint_file=state, checkpoint_every=CHECKPOINT_EVERY_S, resume=restored)
    finally:
        _LOCAL_POSTERIOR = None
        if bar is not None:
            bar.close()
    res = sampler.results
    weights = np.exp(res.logwt - res.logz[-1])
    weights /= weights.sum()
    # a generator of its own (not dynesty's): a restored pilot resamples exactly as an uninterrupted one
    idx = np.random.default_rng([int(seed), 1]).choice(len(weights), size=int(n_resample), p=weights)
    samples = np.asarray(res.samples, dtype=float)[idx]
    return PilotResult(samples=samples, ln_z=float(res.logz[-1]), ln_z_err=float(res.logzerr[-1]),
                       n_calls=int(np.sum(res.ncall)), n_unique=int(np.unique(idx).size))


def distinct_start(samples: np.ndarray, n_walkers: int, rng: np.random.Generator) -> np.ndarray:
    """``n_walkers`` distinct rows of ``samples`` (repeats allowed only if there are too few distinct ones)."""
    unique, counts = np.unique(samples, axis=0, return_counts=True)
    replace = len(unique) < n_walkers
    pick = rng.choice(len(unique), size=n_walkers, replace=replace, p=counts / counts.sum())
    return unique[pick]
