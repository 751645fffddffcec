"""One fit over MPI ranks: the pool itself, and ``mpiexec -n 2 retrieve fit ... --mpi`` against a single process.

Why the chains must be identical: emcee's stretch move (Goodman & Weare
2010; emcee 3 ``EnsembleSampler``) draws every random number on the master
(``random_state``) and only hands the proposed positions to ``pool.map``;
:class:`retrieve.survey.mpi_pool.MPIPool` returns the log-probabilities in
input order, and each rank evaluates the same deterministic posterior.  So
with the same seed the accepted moves, hence the chains, agree bit for bit.
The optimiser (scipy's differential evolution with ``updating="deferred"``
and a ``workers`` map) has the same property.
"""
import json
import subprocess
import sys
from pathlib import Path

import h5py
import numpy as np
import pytest

from retrieve.survey.demo import make_demo_survey

MPIEXEC = Path(sys.executable).parent / "mpiexec"

POOL_SCRIPT = r"""
import json, sys
from retrieve.survey.mpi_pool import MPIPool, WorkerError

def where(x):
    from mpi4py import MPI
    return (MPI.COMM_WORLD.Get_rank(), x * x)

def fails_on_workers(x):
    from mpi4py import MPI
    if MPI.COMM_WORLD.Get_rank() > 0:
        raise ValueError(f"bad point {x}")
    return x

def fails_everywhere(x):
    raise KeyError(x)

with MPIPool() as pool:
    if not pool.is_master:
        n = pool.wait()
        print(json.dumps({"rank": pool.rank, "tasks": n}), flush=True)
    else:
        first = pool.map(where, range(7))
        second = pool.map(where, [10, 11])
        try:
            pool.map(fails_on_workers, range(4))
            error = ""
        except WorkerError as exc:
            error = str(exc)
        try:
            pool.map(fails_everywhere, range(4))
            own = ""
        except KeyError as exc:
            own = repr(exc)
        third = pool.map(where, [3, 4, 5])   # no stale replies left behind by the failures
        print(json.dumps({"rank": 0, "first": first, "second": second, "error": error, "own": own,
                          "third": third}), flush=True)
"""


def _need_mpi():
    pytest.importorskip("mpi4py")
    if not MPIEXEC.is_file():
        pytest.skip(f"no mpiexec beside the interpreter ({MPIEXEC})")


def _json_objects(text: str) -> list:
    """Every JSON object in ``text``, wherever lines from several processes were joined."""
    decoder, out, i = json.JSONDecoder(), [], text.find("{")
    while i >= 0:
        obj, end = decoder.raw_decode(text, i)
        out.append(obj)
        i = text.find("{", end)
    return out


def test_mpi_pool_spreads_points_over_ranks_in_input_order(tmp_path):
    _need_mpi()
    script = tmp_path / "pool.py"
    script.write_text(POOL_SCRIPT)
    proc = subprocess.run([str(MPIEXEC), "-n", "3", sys.executable, str(script)], capture_output=True, text=True,
                          timeout=120, cwd=tmp_path)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    # ranks share one stdout, so two ranks' lines can arrive glued together: decode object by object
    lines = _json_objects(proc.stdout)
    master = next(x for x in lines if x["rank"] == 0 and "first" in x)
    # results in input order, contiguous blocks: 7 points over 3 ranks -> 2, 3, 2 (np.linspace rounding)
    assert [v for _, v in master["first"]] == [x * x for x in range(7)]
    assert [r for r, _ in master["first"]] == [0, 0, 1, 1, 1, 2, 2]
    assert [v for _, v in master["second"]] == [100, 121]
    # a worker's exception reaches the master with its traceback
    assert "ValueError: bad point" in master["error"] and "rank 1" in master["error"]
    # the master's own exception is raised after the workers' replies are collected
    assert master["own"] == "KeyError(0)"
    assert master["third"] == [[0, 9], [1, 16], [2, 25]]
    workers = {x["rank"]: x["tasks"] for x in lines if "tasks" in x}
    assert workers == {1: 5, 2: 5}   # five map calls each; all ranks released at the end


@pytest.mark.slow
def test_mpi_fit_with_two_ranks_gives_the_single_process_chain(tmp_path):
    _need_mpi()
    demo = make_demo_survey(tmp_path, n_objects=1, max_steps=60, check_every=20, optimiser_evaluations=150)
    common = ["-m", "retrieve.cli.main", "fit", f"ifs={demo.spectra[0]}", "--config", str(demo.config),
              "--no-progress"]
    serial = subprocess.run([sys.executable, *common, "--out", str(tmp_path / "serial")], capture_output=True,
                            text=True, timeout=180)
    assert serial.returncode == 0, serial.stderr
    mpi = subprocess.run([str(MPIEXEC), "-n", "2", sys.executable, *common, "--out", str(tmp_path / "mpi"), "--mpi"],
                         capture_output=True, text=True, timeout=180)
    assert mpi.returncode == 0, mpi.stdout + mpi.stderr
    assert mpi.stdout.count("run folder:") == 1           # only rank 0 reports (and writes)
    with h5py.File(tmp_path / "serial" / "chain.h5") as a, h5py.File(tmp_path / "mpi" / "chain.h5") as b:
        np.testing.assert_array_equal(a["chain"][...], b["chain"][...])
        np.testing.assert_array_equal(a["log_prob"][...], b["log_prob"][...])
    manifest = json.loads((tmp_path / "mpi" / "manifest.json").read_text())
    assert manifest["workers"] == 2 and manifest["status"] == "finished"
    assert sorted(p.name for p in (tmp_path / "mpi").iterdir()) == sorted(p.name for p in (tmp_path / "serial").iterdir())


def test_mpi_and_workers_exclude_each_other(tmp_path):
    pytest.importorskip("mpi4py")
    from retrieve.errors import UserError
    from retrieve.survey.mpi_pool import mpi_fit
    with pytest.raises(UserError, match="exclude each other"):
        mpi_fit(tmp_path / "fit.toml", workers=2)
