"""One large fit across MPI ranks: an emcee-compatible pool over ``mpi4py``.

Run the ordinary command under MPI with ``--mpi``::

    mpiexec -n 8 retrieve fit spectrum.ecsv --config fit.toml --out run --mpi

Every rank starts the same program.  Rank 0 (the *master*) runs
:func:`retrieve.inference.run.fit` with an :class:`MPIPool` as the sampler's
``pool``; the other ranks (*workers*) sit in :meth:`MPIPool.wait` and
evaluate the posterior on the points the master sends.  Only rank 0 reads
the checkpoint and writes the run folder.

Each :meth:`MPIPool.map` call splits the points into ``size`` contiguous
blocks: block 0 is evaluated on the master itself (so that ``mpiexec -n 2``
on two cores uses both), block *r* on rank *r*.  Results come back in input
order, so emcee's stretch move sees exactly the log-probabilities a serial
run would see, and a fixed seed gives the same chain as a single process.

The function to evaluate (``posterior.evaluate``) is sent to the workers
once and cached there until a different function arrives; the posterior
pickles without its forward model and rebuilds it on first use on each rank.

Waiting ranks poll with short sleeps instead of MPICH's busy-wait receive,
because on a shared node a spinning idle rank takes a core from the ranks
that compute.
"""
from __future__ import annotations

import time
import traceback

import numpy as np

from ..errors import UserError

_FUNC, _TASK, _STOP = "func", "task", "stop"
_TAG = 7301  # message tag of this pool (any fixed number; keeps our traffic apart)


def _mpi():
    try:
        from mpi4py import MPI
    except ImportError:
        raise UserError("--mpi needs mpi4py and an MPI library; install them with "
                        "'pip install mpi4py mpich' (or use your cluster's MPI)") from None
    return MPI


def _recv(comm, source: int, poll_s: float = 2e-3):
    """Blocking receive that sleeps between probes (see module docstring)."""
    nap = 5e-5
    while not comm.iprobe(source=source, tag=_TAG):
        time.sleep(nap)
        nap = min(2 * nap, poll_s)
    return comm.recv(source=source, tag=_TAG)


def _blocks(n: int, size: int) -> list[range]:
    """Contiguous index blocks, one per rank, differing in length by at most one."""
    bounds = np.linspace(0, n, size + 1).round().astype(int)
    return [range(bounds[r], bounds[r + 1]) for r in range(size)]


class WorkerError(RuntimeError):
    """An evaluation raised on a worker rank; carries the remote traceback."""


class MPIPool:
    """Master/worker pool over the ranks of an MPI communicator.

    Parameters
    ----------
    comm : mpi4py communicator, optional
        Default ``MPI.COMM_WORLD``.

    Notes
    -----
    Use as a context manager on every rank::

        with MPIPool() as pool:
            if pool.is_master:
                result = fit(config, pool=pool)
            else:
                pool.wait()

    Leaving the ``with`` block on the master releases the workers.
    """

    def __init__(self, comm=None):
        self.comm = comm if comm is not None else _mpi().COMM_WORLD
        self.rank = self.comm.Get_rank()
        self.size = self.comm.Get_size()
        self._sent_func = None      # master: function the workers hold
        self._func = None           # worker: function to evaluate
        self._closed = False
        self.n_maps = 0

    @property
    def is_master(self) -> bool:
        return self.rank == 0

    @property
    def n_workers(self) -> int:
        """Ranks other than the master."""
        return self.size - 1

    # ------------------------------------------------------------------ master side
    def map(self, func, iterable) -> list:
        """``[func(x) for x in iterable]`` spread over all ranks (master included), in input order."""
        if not self.is_master:
            raise RuntimeError("MPIPool.map is called on the master rank only")
        if self._closed:
            raise RuntimeError("MPIPool is closed")
        items = list(iterable)
        self.n_maps += 1
        blocks = _blocks(len(items), self.size)
        if func != self._sent_func:
            for r in range(1, self.size):
                self.comm.send((_FUNC, func), dest=r, tag=_TAG)
            self._sent_func = func
        for r in range(1, self.size):
            self.comm.send((_TASK, [items[i] for i in blocks[r]]), dest=r, tag=_TAG)
        own_error = None
        try:
            results = [func(items[i]) for i in blocks[0]]
        except Exception as exc:  # collect the workers' replies first, else they would answer the next map
            own_error, results = exc, []
        failed = []
        for r in range(1, self.size):
            status, payload = _recv(self.comm, r)
            if status == "ok":
                results.extend(payload)
            else:
                failed.append((r, payload))
        if own_error is not None:
            raise own_error
        if failed:
            r, tb = failed[0]
            raise WorkerError(f"MPI rank {r} failed while evaluating:\n{tb}")
        return results

    def close(self) -> None:
        """Release the workers (master); idempotent."""
        if self.is_master and not self._closed:
            for r in range(1, self.size):
                self.comm.send((_STOP, None), dest=r, tag=_TAG)
        self._closed = True

    # ------------------------------------------------------------------ worker side
    def wait(self) -> int:
        """Worker loop: evaluate what the master sends until it says stop; returns tasks done."""
        if self.is_master:
            raise RuntimeError("MPIPool.wait is called on worker ranks only")
        n = 0
        while True:
            kind, payload = _recv(self.comm, 0)
            if kind == _STOP:
                self._closed = True
                return n
            if kind == _FUNC:
                self._func = payload
                continue
            try:
                out = ("ok", [self._func(x) for x in payload])
            except Exception:  # reported to the master, which raises
                out = ("error", traceback.format_exc())
            self.comm.send(out, dest=0, tag=_TAG)
            n += 1

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def mpi_fit(config, workers: int = 1, **fit_kwargs):
    """:func:`retrieve.inference.run.fit` with walker evaluations spread over the MPI ranks.

    Call on every rank (e.g. under ``mpiexec``).  Rank 0 runs the fit and
    returns its :class:`~retrieve.inference.run.RunResult`; the other ranks
    evaluate posterior points until the fit ends and return None.

    Parameters
    ----------
    config : path or FitConfig
    workers : int
        Must be 1: processes come from MPI here.
    **fit_kwargs
        Passed to :func:`~retrieve.inference.run.fit` (``spectra``, ``out_dir``,
        ``max_steps``, ``seed``, ``resume``, ``overwrite``, ``progress`` …).
    """
    if int(workers) != 1:
        raise UserError("--workers and --mpi exclude each other; with --mpi the ranks of mpiexec -n K "
                        "do the work")
    from ..inference.run import fit
    with MPIPool() as pool:
        if not pool.is_master:
            pool.wait()
            return None
        return fit(config, workers=pool.size, pool=pool, **fit_kwargs)
