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

import numpy as np

# ln L handed to dynesty for points where the model fails (it needs a finite number)
_LOG_FLOOR = -1.0e300

def log_likelihood_of(posterior, theta) -> float:
    """ln L(θ) = ln p(θ | d) − ln π(θ) from ``posterior.evaluate``; failures → a very low value."""
    lp, _ = posterior.evaluate(theta)
    if not math.isfinite(lp):
        return _LOG_FLOOR
    return lp - posterior.log_prior(theta)


class _LogLikelihood:
    """Picklable ln L: uses the posterior built once per pool worker, or the one given."""

    def __init__(self, posterior=None):
        self.posterior = posterior

    def __call__(self, theta):
        if self.posterior is not None:
            post = self.posterior
        else:                    # inside a pool worker started by sampler.EvaluationMap
            from . import sampler
            post = sampler._WORKER_POSTERIOR
        return log_likelihood_of(post, np.asarray(theta, dtype=float))

    def __getstate__(self):      # never ship the posterior to a worker: it has its own
        return {"posterior": None}


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

    map = staticmethod(lambda func, items: list(map(func, items)))


#: points dynesty proposes at a time (one per worker with up to this many workers)
QUEUE_SIZE = 4


def run_pilot(posterior, live_points: int, dlogz: float, seed: int, pool=None,
              n_resample: int = 20000) -> PilotResult:
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
    """
    import dynesty

    rng = np.random.default_rng(seed)
    loglike = _LogLikelihood(None if pool is not None else posterior)
    # the same queue with or without workers: dynesty's proposals, hence the pilot, do not
    # depend on the worker count (a serial run maps in this process)
    sampler = dynesty.NestedSampler(loglike, PriorTransform(posterior.priors), posterior.ndim,
                                    nlive=int(live_points), sample="rwalk", bound="multi",
                                    rstate=rng, pool=pool if pool is not None else _SerialMap(),
                                    queue_size=QUEUE_SIZE)
    with np.errstate(all="ignore"):
        sampler.run_nested(dlogz=float(dlogz), print_progress=False)
    res = sampler.results
    weights = np.exp(res.logwt - res.logz[-1])
    weights /= weights.sum()
    idx = rng.choice(len(weights), size=int(n_resample), p=weights)
    samples = np.asarray(res.samples, dtype=float)[idx]
    return PilotResult(samples=samples, ln_z=float(res.logz[-1]), ln_z_err=float(res.logzerr[-1]),
                       n_calls=int(np.sum(res.ncall)), n_unique=int(np.unique(idx).size))


def distinct_start(samples: np.ndarray, n_walkers: int, rng: np.random.Generator) -> np.ndarray:
    """``n_walkers`` distinct rows of ``samples`` (repeats allowed only if there are too few distinct ones)."""
    unique, counts = np.unique(samples, axis=0, return_counts=True)
    replace = len(unique) < n_walkers
    pick = rng.choice(len(unique), size=n_walkers, replace=replace, p=counts / counts.sum())
    return unique[pick]
