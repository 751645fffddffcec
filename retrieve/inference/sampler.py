"""The emcee driver: start near the posterior maximum, sample in checkpointed chunks, stop on convergence.

Steps
-----
1. Global optimisation of ln posterior with
   :func:`scipy.optimize.differential_evolution` inside the priors' bounds
   (seeded, ``updating="deferred"`` so that serial and parallel runs agree,
   evaluations capped at ``optimiser_max_evaluations``), then a local polish
   (bounded Nelder–Mead, ``polish_max_evaluations`` each) from up to
   ``polish_candidates`` distinct members of the final DE population; the
   best polished point is the start.  The DE population alone stops short of
   the maximum on narrow ridges (see the fit benchmark).
2. Walker ball (``ball = "hessian"``, default): a Gaussian with the Laplace
   covariance (−H)⁻¹ of ln p at the start, H by central finite differences
   in prior-width units, its eigenvalues floored so that no direction is
   wider than a uniform prior (σ ≤ width/√12); draws outside the prior
   support are redrawn.  Fallback (a non-finite Hessian, or ``ball =
   "fixed"``): a ball of width ``ball_scale`` × prior width.  Walkers with
   ln p = −∞ are redrawn.
   With ``pilot = "nested"`` steps 1–2 are replaced by a nested-sampling
   pilot run (:mod:`retrieve.inference.pilot`): the walkers start on
   distinct points of its equal-weight posterior sample, and a Gaussian
   mixture fitted to that sample (:mod:`retrieve.inference.mixture`) is
   frozen as the independence proposal of ``moves = "pilot-mixture"``.
   With ``pilot = "chain"`` steps 1–2 run as usual and are followed by a
   preliminary chain of ``pilot_steps`` steps (its own generator stream,
   never part of the result) in ``pilot_rounds`` rounds: the first with the
   ``"differential-evolution"`` moves, the later ones with the
   pilot-mixture moves and the mixture refitted after each round to the
   second half of the pilot so far (see :func:`_pilot_chain`); the walkers
   continue from where it ends.  Much cheaper than a nested pilot when the
   optimiser already finds the posterior's bulk, but it cannot discover a
   mode the preliminary chain never reaches.
3. :class:`emcee.EnsembleSampler` (moves of :mod:`retrieve.inference.moves`) run in
   chunks of ``check_every`` steps, in the sampler coordinates of
   :mod:`retrieve.inference.coordinates` (the parameters themselves unless
   ``coordinates = "unbounded"``; the stored chain is always physical).  After each chunk: τ estimate (after the
   start-up discard of :func:`~retrieve.inference.convergence.tau_discard`),
   convergence test (:mod:`retrieve.inference.convergence`) and an atomic
   checkpoint (:mod:`retrieve.inference.checkpoint`).

Every chunk starts from an explicit ``emcee.State`` (positions, ln p and the
generator state), both in a fresh run and after ``resume``; a resumed run
therefore reproduces the uninterrupted chain exactly.

Parallelism: with ``workers > 1`` a :class:`multiprocessing.Pool` is started
whose initialiser builds the forward model once per worker process.  An
external ``pool`` (any object with ``map(func, iterable)`` returning results
in input order, e.g. :class:`retrieve.survey.mpi_pool.MPIPool`) replaces it:
it is handed ``posterior.evaluate`` and the points.
"""
from __future__ import annotations

import dataclasses
import math
import multiprocessing
import time
import warnings
from collections import Counter
from pathlib import Path

import emcee
import numpy as np
from scipy import optimize

from ..errors import UserError
from .checkpoint import Checkpoint, read_checkpoint, remove_stale_temporaries, write_checkpoint
from .convergence import ConvergenceRule, autocorr_time, tau_discard
from .coordinates import Coordinates, SamplerSpace
from .mixture import defensive, fit_mixture
from .moves import NEEDS_MIXTURE, make_moves
from .pilot import distinct_start, run_pilot

#: the pilot's saved state, next to the chain checkpoint until the first chain checkpoint exists
PILOT_STATE = "pilot-state.pkl"

# ln p substituted for -inf inside the optimiser (differential evolution needs finite values)
_WORST = 1e300


@dataclasses.dataclass(frozen=True)
class SamplerSettings:
    """Sampler options (the ``[sampler]`` TOML table; see :mod:`retrieve.inference.config`)."""

    walkers: int = 0
    max_steps: int = 20000
    check_every: int = 100
    seed: int = 0
    tau_factor: float = 50.0
    tau_rtol: float = 0.01
    burn_in_tau: float = 3.0
    thin_tau: float = 0.5
    burn_in: int | None = None
    thin: int | None = None
    optimiser: str = "differential-evolution"
    optimiser_max_evaluations: int = 10000
    optimiser_popsize: int = 10
    ball_scale: float = 1e-3
    ball: str = "hessian"
    polish_max_evaluations: int = 3000
    polish_candidates: int = 2
    predictive_draws: int = 200
    progress: bool = True
    moves: str = "stretch"
    pilot: str = "none"
    pilot_live_points: int = 200
    pilot_dlogz: float = 1.0
    pilot_steps: int = 2000
    pilot_rounds: int = 4
    mixture_components: int = 16
    coordinates: str = "physical"

    def n_walkers(self, ndim: int) -> int:
        """Walker count: ``walkers`` or, when 0, the smallest even number ≥ 2·ndim + 2."""
        if self.walkers:
            return int(self.walkers)
        n = 2 * ndim + 2
        return n + (n % 2)


class SamplerInterrupted(UserError):
    """Raised when a checkpoint does not match the run being resumed."""


# --------------------------------------------------------------------------- evaluation map
_WORKER_POSTERIOR = None
_WORKER_ERROR = None


def _init_worker(posterior):
    """Pool initialiser: keep the posterior and build its model once in this process.

    A failure is kept, not raised: an initialiser that raises makes
    multiprocessing replace the worker again and again, so the run would hang.
    The first task then reports it (:func:`worker_posterior`).
    """
    global _WORKER_POSTERIOR, _WORKER_ERROR
    try:
        _ = posterior.model
        _WORKER_POSTERIOR = posterior
    except Exception as exc:  # noqa: BLE001 - reported by the first task, in the parent
        _WORKER_ERROR = f"{type(exc).__name__}: {exc}"


def worker_posterior():
    """The posterior of this pool worker; a one-line :class:`UserError` if it could not be built."""
    if _WORKER_ERROR is not None:
        raise UserError(f"a worker process could not build the model ({_WORKER_ERROR}); "
                        f"try --workers 1 to see the error in the main process")
    return _WORKER_POSTERIOR


def _worker_evaluate(theta):
    return worker_posterior().evaluate(theta)


def _worker_polish(task):
    return polish(worker_posterior(), *task)


class EvaluationMap:
    """Evaluate the posterior over many points, serially or on a pool, counting failures.

    ``n_evaluations`` counts likelihood evaluations (points inside the prior support).

    Passed to emcee as its ``pool`` (emcee only calls ``.map``): the function
    emcee hands over is its wrapper of the same posterior, so we evaluate the
    posterior directly and keep the failure reasons, which emcee would drop.
    """

    def __init__(self, posterior, workers: int = 1, pool=None):
        self.posterior = posterior
        self.workers = int(workers)
        self.failures: Counter = Counter()
        self.n_evaluations = 0
        self._pool = None
        self._external = pool  # caller-owned (e.g. MPI); never closed here
        if self.workers > 1 and pool is None:
            ctx = multiprocessing.get_context("fork")
            self._pool = ctx.Pool(self.workers, initializer=_init_worker, initargs=(posterior,))

    def evaluate(self, points) -> np.ndarray:
        points = [np.asarray(p, dtype=float) for p in points]
        if self._external is not None:
            results = list(self._external.map(self.posterior.evaluate, points))
        elif self._pool is not None:
            results = self._pool.map(_worker_evaluate, points)
        else:
            results = [self.posterior.evaluate(p) for p in points]
        for lp, reason in results:
            if reason:
                self.failures[reason] += 1
            # count likelihood (model) evaluations; points outside the prior cost nothing
            self.n_evaluations += bool(reason) or lp != -math.inf
        return np.array([lp for lp, _ in results], dtype=float)

    def map(self, func, iterable):  # emcee's pool interface
        return list(self.evaluate(list(iterable)))

    def negative_map(self, func, iterable):  # differential_evolution's ``workers`` interface
        lp = self.evaluate(list(iterable))
        return list(np.where(np.isfinite(lp), -lp, _WORST))

    def close(self):
        if self._pool is not None:
            self._pool.close()
            self._pool.join()
            self._pool = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if self._pool is not None and exc[0] is not None:
            self._pool.terminate()
        self.close()


# --------------------------------------------------------------------------- start positions
def prior_bounds(priors) -> np.ndarray:
    """(ndim, 2) finite bounds holding the prior mass."""
    return np.array([p.bounds for p in priors], dtype=float)


def _de_population(evaluator: EvaluationMap, priors, settings: SamplerSettings, seed: int,
                   progress: bool = False):
    """Final differential-evolution population sorted by ln p (best first): (points, -ln p)."""
    bounds = prior_bounds(priors)
    ndim = len(priors)
    popsize = max(int(settings.optimiser_popsize), 1)
    maxiter = max(1, settings.optimiser_max_evaluations // (popsize * ndim) - 1)
    bar = _progress_bar(progress, maxiter, 0, "optimiser", unit="generation")

    def generation_done(x, convergence=None):     # scipy's per-generation callback (legacy signature)
        if bar is not None:
            bar.update(1)
    try:
        res = optimize.differential_evolution(
            lambda x: 0.0, bounds, maxiter=maxiter, popsize=popsize, seed=seed, polish=False,
            updating="deferred", workers=evaluator.negative_map, init="latinhypercube", tol=1e-8,
            callback=generation_done)
    finally:
        if bar is not None:
            bar.close()
    pop = np.asarray(getattr(res, "population", [res.x]), dtype=float)
    energy = np.asarray(getattr(res, "population_energies", [res.fun]), dtype=float)
    order = np.argsort(energy, kind="stable")
    return pop[order], energy[order]


def distinct_candidates(points, bounds, k: int, min_distance: float = 0.05) -> np.ndarray:
    """The first ``k`` of ``points`` (sorted best first) that lie ≥ ``min_distance`` apart in prior-width units."""
    width = bounds[:, 1] - bounds[:, 0]
    picked = []
    for p in points:
        if all(np.max(np.abs((p - q) / width)) >= min_distance for q in picked):
            picked.append(p)
        if len(picked) >= k:
            break
    return np.array(picked)


def polish(posterior, x0, bounds, max_evaluations: int):
    """Bounded Nelder–Mead ascent of ln p from ``x0``: (point, ln p, evaluations)."""
    def neg(x):
        lp, _ = posterior.evaluate(x)
        return -lp if np.isfinite(lp) else _WORST
    res = optimize.minimize(neg, np.asarray(x0, float), method="Nelder-Mead", bounds=bounds,
                            options={"maxfev": int(max_evaluations), "xatol": 1e-6, "fatol": 1e-4,
                                     "adaptive": True})   # adaptive simplex for ndim > 5 (Gao & Han 2012)
    return np.asarray(res.x, float), -float(res.fun), int(res.nfev)


def find_maximum(evaluator: EvaluationMap, priors, settings: SamplerSettings, seed: int,
                 progress: bool = False) -> np.ndarray:
    """Approximate maximum of ln posterior: differential evolution, then Nelder–Mead polish of the best candidates.

    ``progress`` shows a bar per stage (generations, then polished candidates).
    """
    bounds = prior_bounds(priors)
    pop, energy = _de_population(evaluator, priors, settings, seed, progress)
    if settings.polish_max_evaluations <= 0 or settings.polish_candidates <= 0:
        return pop[0]
    starts = distinct_candidates(pop, bounds, settings.polish_candidates)
    tasks = [(x0, bounds, settings.polish_max_evaluations) for x0 in starts]
    bar = _progress_bar(progress, len(tasks), 0, "polish", unit="candidate")
    if evaluator._pool is not None:     # one polish per worker process, results in task order
        jobs = evaluator._pool.imap(_worker_polish, tasks)
    else:
        jobs = (polish(evaluator.posterior, *t) for t in tasks)
    results = []
    try:
        for r in jobs:
            results.append(r)
            if bar is not None:
                bar.update(1)
    finally:
        if bar is not None:
            bar.close()
    evaluator.n_evaluations += sum(r[2] for r in results)
    best = max(results, key=lambda r: r[1])
    return best[0] if best[1] > -energy[0] else pop[0]


def laplace_covariance(evaluator: EvaluationMap, centre, bounds, step: float = 2e-3,
                       max_sigma: float = 12 ** -0.5) -> np.ndarray | None:
    """Covariance (−H)⁻¹ of ln p at ``centre`` (Laplace approximation), ``None`` if H is not finite.

    H is taken by central differences with ``step`` in prior-width units (one
    batch of 1 + 2n + 2n(n−1) evaluations) at the centre moved ``step`` inside
    the support when it sits on a bound.  Eigenvalues of −H are floored at
    ``max_sigma``⁻² (prior-width units) so that flat or curved-down
    directions get at most the standard deviation of a uniform prior.
    """
    width = bounds[:, 1] - bounds[:, 0]
    n = len(width)
    u0 = np.clip((np.asarray(centre, float) - bounds[:, 0]) / width, 1.5 * step, 1 - 1.5 * step)
    e = np.eye(n) * step
    pts, index = [u0], {}
    for i in range(n):
        for si in (1, -1):
            index[(i, si)] = len(pts)
            pts.append(u0 + si * e[i])
    pairs = [(i, j) for i in range(n) for j in range(i + 1, n)]
    for i, j in pairs:
        for si in (1, -1):
            for sj in (1, -1):
                index[(i, si, j, sj)] = len(pts)
                pts.append(u0 + si * e[i] + sj * e[j])
    lp = evaluator.evaluate([bounds[:, 0] + p * width for p in pts])
    if not np.all(np.isfinite(lp)):
        return None
    h = np.empty((n, n))
    for i in range(n):
        h[i, i] = (lp[index[(i, 1)]] + lp[index[(i, -1)]] - 2 * lp[0]) / step ** 2
    for i, j in pairs:
        h[i, j] = h[j, i] = (lp[index[(i, 1, j, 1)]] - lp[index[(i, 1, j, -1)]] - lp[index[(i, -1, j, 1)]]
                             + lp[index[(i, -1, j, -1)]]) / (4 * step ** 2)
    return _floored_inverse(-h, max_sigma) * np.outer(width, width)


def _floored_inverse(neg_h: np.ndarray, max_sigma: float) -> np.ndarray:
    """(−H)⁻¹ with the eigenvalues of −H floored at ``max_sigma``⁻²."""
    lam, vec = np.linalg.eigh(neg_h)
    lam = np.maximum(lam, max_sigma ** -2)
    return (vec / lam) @ vec.T


def initial_ball(centre, priors, n_walkers: int, scale: float, rng: np.random.Generator,
                 evaluator: EvaluationMap, max_tries: int = 50, covariance=None) -> tuple[np.ndarray, np.ndarray]:
    """Walker positions around ``centre``, all with finite ln p.

    With ``covariance`` the walkers are Gaussian draws of that covariance,
    redrawn while outside the prior bounds; without, a ball of width
    ``scale`` × prior width (widened when the centre sits on a cliff).
    """
    bounds = prior_bounds(priors)
    width = bounds[:, 1] - bounds[:, 0]
    eps = 1e-9 * width
    chol = None if covariance is None else np.linalg.cholesky(covariance)
    pos = np.empty((n_walkers, len(priors)))
    lp = np.full(n_walkers, -np.inf)
    todo = np.arange(n_walkers)
    for attempt in range(max_tries):
        if chol is None:
            grow = 2.0 ** min(attempt, 10)  # widen the ball if the centre sits on a cliff
            trial = centre + scale * grow * width * rng.standard_normal((todo.size, len(priors)))
        else:
            trial = _draw_inside(centre, chol, bounds, todo.size, rng)
        trial = np.clip(trial, bounds[:, 0] + eps, bounds[:, 1] - eps)
        pos[todo] = trial
        lp[todo] = evaluator.evaluate(trial)
        todo = np.flatnonzero(~np.isfinite(lp))
        if todo.size == 0:
            return pos, lp
    reasons = ", ".join(f"{k} ×{v}" for k, v in evaluator.failures.most_common(3)) or "zero prior density"
    raise UserError(f"could not place {todo.size} of {n_walkers} walkers at a finite posterior "
                    f"after {max_tries} tries ({reasons}); widen the priors or check the model")


def _draw_inside(centre, chol, bounds, n: int, rng: np.random.Generator, max_rounds: int = 100) -> np.ndarray:
    """``n`` draws of N(centre, chol cholᵀ) redrawn while outside ``bounds`` (then clipped)."""
    out = centre + rng.standard_normal((n, len(centre))) @ chol.T
    for _ in range(max_rounds):
        bad = np.flatnonzero(np.any((out < bounds[:, 0]) | (out > bounds[:, 1]), axis=1))
        if bad.size == 0:
            break
        out[bad] = centre + rng.standard_normal((bad.size, len(centre))) @ chol.T
    return out


def prior_draws(priors, n_walkers: int, rng: np.random.Generator, evaluator: EvaluationMap,
                max_tries: int = 50):
    """Walker positions drawn from the prior, all with finite ln p (optimiser switched off)."""
    pos = np.column_stack([p.sample(rng, n_walkers) for p in priors])
    lp = evaluator.evaluate(pos)
    for _ in range(max_tries):
        bad = np.flatnonzero(~np.isfinite(lp))
        if bad.size == 0:
            return pos, lp
        pos[bad] = np.column_stack([p.sample(rng, bad.size) for p in priors])
        lp[bad] = evaluator.evaluate(pos[bad])
    raise UserError("could not draw walkers with finite posterior from the prior; check the model")


# --------------------------------------------------------------------------- the run
@dataclasses.dataclass
class SamplerResult:
    """Outcome of :func:`run_sampler`."""

    checkpoint: Checkpoint
    converged: bool
    tau: np.ndarray
    acceptance_fraction: np.ndarray
    n_evaluations: int
    failures: Counter
    elapsed_s: float
    sampling_s: float
    resumed_from: int = 0
    pilot: dict = dataclasses.field(default_factory=dict)


def _seeds(seed: int) -> tuple[int, np.random.Generator, int]:
    """Independent streams for the optimiser, the ball and emcee from one seed."""
    ss = np.random.SeedSequence(int(seed))
    a, b, c = ss.spawn(3)
    return (int(a.generate_state(1)[0]), np.random.default_rng(b),
            int(c.generate_state(1)[0]))


@dataclasses.dataclass
class StartState:
    """Initial positions, their ln p, emcee's generator state and what the start stage produced."""

    positions: np.ndarray
    log_prob: np.ndarray
    random_state: tuple
    proposal: object = None          # GaussianMixture for the "pilot-mixture" moves
    pilot: dict = dataclasses.field(default_factory=dict)


def _pilot_start(posterior, settings: SamplerSettings, evaluator: EvaluationMap, seed: int,
                 rng: np.random.Generator, n_walkers: int, progress: bool = False,
                 state_file=None, resume: bool = False, coordinates: Coordinates | None = None):
    """Walkers on distinct pilot samples, and the proposal mixture fitted to the pilot sample.

    The mixture is fitted in sampler coordinates (``coordinates``), where the moves use it.
    """
    pool = evaluator._pool
    pilot = run_pilot(posterior, settings.pilot_live_points, settings.pilot_dlogz, seed, pool=pool,
                      progress=progress, state_file=state_file, resume=resume)
    evaluator.n_evaluations += pilot.n_calls
    pos = distinct_start(pilot.samples, n_walkers, rng)
    lp = evaluator.evaluate(pos)
    bad = np.flatnonzero(~np.isfinite(lp))
    if bad.size:       # pilot points where the model failed (dynesty saw a floor value): redraw
        pos[bad] = distinct_start(pilot.samples, bad.size, rng)
        lp[bad] = evaluator.evaluate(pos[bad])
        if not np.all(np.isfinite(lp)):
            raise UserError("the nested-sampling pilot found too few points with a finite posterior; "
                            "check the model or raise pilot_live_points")
    proposal = None
    if settings.moves in NEEDS_MIXTURE:
        samples = pilot.samples if coordinates is None else coordinates.to_sampler(pilot.samples)
        proposal = _proposal_mixture(samples, settings, rng)
    summary = pilot.summary()
    if proposal is not None:
        summary["mixture_components"] = proposal.n_components - 1
    return pos, lp, proposal, summary


def _proposal_mixture(samples: np.ndarray, settings: SamplerSettings, rng: np.random.Generator):
    """The defensive mixture fitted to ``samples``: the frozen proposal of ``pilot-mixture``."""
    counts = tuple(k for k in (1, 2, 4, 8, 12, 16, 24, 32) if k <= max(1, settings.mixture_components))
    return defensive(fit_mixture(samples, rng, components=counts), samples)


def _round_lengths(steps: int, rounds: int) -> list[int]:
    """``steps`` split into ``rounds`` near-equal parts (the earlier rounds take the remainder)."""
    rounds = max(1, min(int(rounds), int(steps) // 2))
    base, extra = divmod(int(steps), rounds)
    return [base + (i < extra) for i in range(rounds)]


def _pilot_chain(posterior, settings: SamplerSettings, space: SamplerSpace, pos, lp, seed: int,
                 rng: np.random.Generator, progress: bool = False):
    """Preliminary chain from ``pos`` (sampler coordinates, as everything here), in rounds.

    The first round uses the differential-evolution moves.  With the
    ``pilot-mixture`` moves, a mixture is fitted after every round to the
    second half of the pilot chain so far, and the next round (of
    ``pilot_rounds``) already uses the pilot-mixture moves with it: each
    round's independence draws reach further along the posterior than the
    last round's local moves did, and the next mixture covers more of it.
    The last fit is the frozen proposal of the recorded chain; nothing of the
    pilot chain itself is kept.

    Returns the final walkers, their ln p, the mixture and a summary.
    """
    n_walkers, ndim = pos.shape
    evaluator = space.evaluator
    calls_before = evaluator.n_evaluations
    wants_mixture = settings.moves in NEEDS_MIXTURE
    lengths = _round_lengths(settings.pilot_steps, settings.pilot_rounds if wants_mixture else 1)
    generator = np.random.RandomState(seed)
    bar = _progress_bar(progress, settings.pilot_steps, 0, "pilot chain")
    proposal, chains, acceptance = None, [], []
    try:
        for steps in lengths:
            moves = make_moves("differential-evolution") if proposal is None else \
                make_moves(settings.moves, proposal)
            sampler = emcee.EnsembleSampler(n_walkers, ndim, posterior, pool=space, moves=moves)
            state = emcee.State(pos, log_prob=lp, random_state=generator.get_state())
            for state in sampler.sample(state, iterations=steps, store=True):
                if bar is not None:
                    bar.update(1)
            generator.set_state(sampler.random_state)
            pos, lp = state.coords.copy(), state.log_prob.copy()
            chains.append(sampler.get_chain())
            acceptance.append(float(np.mean(sampler.acceptance_fraction)))
            chain = np.concatenate(chains)
            samples = chain[chain.shape[0] // 2:].reshape(-1, ndim)
            if wants_mixture:
                proposal = _proposal_mixture(samples, settings, rng)
    finally:
        if bar is not None:
            bar.close()
    summary = {"method": "preliminary differential-evolution chain", "steps": int(settings.pilot_steps),
               "likelihood_calls": int(evaluator.n_evaluations - calls_before),
               "distinct_samples": int(np.unique(samples, axis=0).shape[0]),
               "acceptance": float(np.average(acceptance, weights=lengths))}
    if len(lengths) > 1:
        summary["method"] = f"preliminary chain in {len(lengths)} rounds (differential-evolution, then pilot-mixture)"
        summary["rounds"] = len(lengths)
    if proposal is not None:
        summary["mixture_components"] = proposal.n_components - 1
    return pos, lp, proposal, summary


def _enter_sampler_space(space: SamplerSpace, pos, lp):
    """Walker positions and ln p in sampler coordinates from physical ones.

    With a non-trivial map the posterior is evaluated again at x(y(x)), so
    that ln p belongs exactly to the walker's position (the round trip moves
    x by a few ulp).
    """
    if space.coordinates.identity:
        return pos, lp
    y = space.coordinates.to_sampler(pos)
    lp_y = np.array(space.map(None, y))
    if not np.all(np.isfinite(lp_y)):
        raise UserError("a start position has zero posterior density after the change to unbounded "
                        "coordinates; use coordinates = \"physical\" in [sampler]")
    return y, lp_y


def start_state(posterior, settings: SamplerSettings, evaluator: EvaluationMap,
                progress: bool = False, pilot_state=None, resume_pilot: bool = False,
                space: SamplerSpace | None = None) -> StartState:
    """Initial positions (sampler coordinates of ``space``), their ln p and emcee's generator state.

    ``pilot_state``: file where a nested-sampling pilot saves its state;
    ``resume_pilot`` continues a saved pilot there.
    """
    if space is None:
        space = SamplerSpace(evaluator, Coordinates(posterior.priors, settings.coordinates))
    de_seed, rng, emcee_seed = _seeds(settings.seed)
    n_walkers = settings.n_walkers(posterior.ndim)
    random_state = np.random.RandomState(emcee_seed).get_state()
    if settings.pilot == "nested":
        pos, lp, proposal, pilot = _pilot_start(posterior, settings, evaluator, de_seed, rng, n_walkers,
                                                progress, pilot_state, resume_pilot, space.coordinates)
        pos, lp = _enter_sampler_space(space, pos, lp)
        return StartState(pos, lp, random_state, proposal, pilot)
    if settings.optimiser == "none":
        pos, lp = prior_draws(posterior.priors, n_walkers, rng, evaluator)
    else:
        best = find_maximum(evaluator, posterior.priors, settings, de_seed, progress)
        cov = None
        if settings.ball == "hessian":
            cov = laplace_covariance(evaluator, best, prior_bounds(posterior.priors))
        pos, lp = initial_ball(best, posterior.priors, n_walkers, settings.ball_scale, rng, evaluator,
                               covariance=cov)
    pos, lp = _enter_sampler_space(space, pos, lp)
    if settings.pilot == "chain":
        pilot_seed = int(np.random.SeedSequence([int(settings.seed), 1]).generate_state(1)[0])
        pos, lp, proposal, pilot = _pilot_chain(posterior, settings, space, pos, lp, pilot_seed, rng, progress)
        return StartState(pos, lp, random_state, proposal, pilot)
    return StartState(pos, lp, random_state)


def run_sampler(posterior, settings: SamplerSettings, checkpoint_path, workers: int = 1,
                resume: bool = False, config_digest: str = "", progress: bool | None = None,
                pool=None) -> SamplerResult:
    """Run (or continue) the ensemble sampler until convergence or ``settings.max_steps``.

    Parameters
    ----------
    posterior : LogPosterior
        Must offer ``ndim``, ``priors``, ``param_names`` and ``evaluate``.
    settings : SamplerSettings
    checkpoint_path : path
        HDF5 checkpoint written every ``check_every`` steps.
    workers : int
        Processes evaluating the posterior.
    resume : bool
        Continue from ``checkpoint_path``.
    config_digest : str
        Digest of the configuration; a resume with a different one is refused.
    pool : object with ``map``, optional
        External pool evaluating ``posterior.evaluate`` (replaces ``workers``).
    """
    t0 = time.perf_counter()
    checkpoint_path = Path(checkpoint_path)
    rule = ConvergenceRule(settings.tau_factor, settings.tau_rtol)
    show = settings.progress if progress is None else progress
    pilot_state = checkpoint_path.with_name(PILOT_STATE)
    restart = bool(resume and not checkpoint_path.is_file())
    if restart:
        # killed before the first chain checkpoint: the start stage runs again (a saved pilot
        # continues where it stopped) and the chain is the one an uninterrupted run draws
        warnings.warn(f"{checkpoint_path}: no chain checkpoint yet; repeating the start stage",
                      RuntimeWarning, stacklevel=2)
        resume = False
    with EvaluationMap(posterior, workers, pool=pool) as evaluator:
        space = SamplerSpace(evaluator, Coordinates(posterior.priors, settings.coordinates))
        if resume:
            remove_stale_temporaries(checkpoint_path)
            ck = read_checkpoint(checkpoint_path)
            if ck.param_names != posterior.param_names or (config_digest and ck.config_digest != config_digest):
                raise SamplerInterrupted(f"{checkpoint_path}: checkpoint was written by a different "
                                         f"configuration; use --overwrite to start afresh")
            evaluator.failures.update(ck.failures)
            evaluator.n_evaluations = ck.n_evaluations
            pos, lp = ck.walker_state()
            rstate = ck.random_state
            proposal, pilot = ck.proposal, ck.pilot
            chains, lps = [ck.chain], [ck.log_prob]
            accepted = ck.accepted.astype(np.int64)
            history = [row for row in ck.tau_history]
            elapsed_before = ck.elapsed_s
            n_done = ck.n_steps
            converged = ck.converged
        else:
            start = start_state(posterior, settings, evaluator, progress=show, pilot_state=pilot_state,
                                resume_pilot=restart, space=space)
            pos, lp, rstate = start.positions, start.log_prob, start.random_state
            proposal, pilot = start.proposal, start.pilot
            chains, lps, history = [], [], []
            accepted = np.zeros(len(pos), dtype=np.int64)
            elapsed_before, n_done, converged = 0.0, 0, False
        resumed_from = n_done
        n_walkers, ndim = pos.shape
        sampler = emcee.EnsembleSampler(n_walkers, ndim, posterior, pool=space,
                                        moves=make_moves(settings.moves, proposal))
        t_sampling = time.perf_counter()
        bar = _progress_bar(show, settings.max_steps, n_done)
        tau = history[-1][1:] if history else np.full(ndim, np.nan)
        try:
            while n_done < settings.max_steps and not converged:
                k = min(settings.check_every, settings.max_steps - n_done)
                sampler.reset()
                state = emcee.State(pos, log_prob=lp, random_state=rstate)
                for state in sampler.sample(state, iterations=k, store=True):
                    if bar is not None:
                        bar.update(1)
                chunk = sampler.get_chain()                    # sampler coordinates
                chains.append(space.coordinates.to_physical(chunk))
                lps.append(space.physical_log_prob(chunk, sampler.get_log_prob()))
                accepted += sampler.backend.accepted.astype(np.int64)
                pos, lp, rstate = state.coords.copy(), state.log_prob.copy(), sampler.random_state
                n_done += k
                chain = np.concatenate(chains)
                chains, lps = [chain], [np.concatenate(lps)]
                tau_prev = history[-1][1:] if history else None
                discard = tau_discard(n_done, tau_prev, settings.burn_in_tau)
                tau = autocorr_time(chain[discard:])
                converged = rule.converged(n_done - discard, tau, tau_prev)
                history.append(np.concatenate([[n_done], tau]))
                ck = Checkpoint(posterior.param_names, chain, lps[0], accepted, rstate, np.array(history),
                                config_digest, settings.seed, converged, dict(evaluator.failures),
                                evaluator.n_evaluations,
                                elapsed_before + time.perf_counter() - t0, proposal, pilot,
                                *((None, None) if space.coordinates.identity else (pos, lp)))
                write_checkpoint(checkpoint_path, ck)
                pilot_state.unlink(missing_ok=True)     # the chain checkpoint now holds what the pilot gave
                if bar is not None:
                    bar.set_postfix(acc=f"{np.mean(accepted) / n_done:.2f}",
                                    tau=f"{np.nanmax(tau):.1f}" if np.any(np.isfinite(tau)) else "nan")
        finally:
            if bar is not None:
                bar.close()
        if not chains:
            raise UserError(f"{checkpoint_path}: max_steps={settings.max_steps} leaves nothing to sample")
        if not converged:
            warnings.warn(f"chain did not converge within {n_done} steps "
                          f"(needs > {settings.tau_factor:g} τ = {settings.tau_factor * np.nanmax(tau):.0f} "
                          f"steps and τ stable to {settings.tau_rtol:.0%}); raise max_steps and use --resume",
                          RuntimeWarning, stacklevel=2)
        return SamplerResult(
            checkpoint=ck, converged=bool(converged), tau=np.asarray(tau, dtype=float),
            acceptance_fraction=accepted / max(n_done, 1), n_evaluations=evaluator.n_evaluations,
            failures=Counter(evaluator.failures), elapsed_s=elapsed_before + time.perf_counter() - t0,
            sampling_s=time.perf_counter() - t_sampling, resumed_from=resumed_from, pilot=dict(pilot))


def _progress_bar(show: bool, total: int, initial: int, desc: str = "sampling", unit: str = "step"):
    if not show:
        return None
    from tqdm.auto import tqdm
    return tqdm(total=total, initial=initial, desc=desc, unit=unit, dynamic_ncols=True)
