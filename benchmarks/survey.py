"""Survey-scale benchmark: N tiny fits on Dask with 1 and with 2 workers.

Usage::

    python benchmarks/survey.py [--objects N] [--max-steps S] [--folder DIR]

Builds the demo survey of :mod:`retrieve.survey.demo` (synthetic opacity
table, 12 channels, 10 layers; demo data), then for 1 and 2 local workers:
starts a LocalCluster, imports the package on every worker (so that import
time is not counted as fitting), and runs :func:`retrieve.survey.run_survey`
on it.  Printed:

* cluster start-up and warm-up time (not part of the comparison);
* dispatch wall time (first submission → last result), the summary step's
  time, and the sum of the in-task fit times;
* speed-up = wall(1 worker) / wall(2 workers) (target ≥ 1.8 on 2 free cores);
* engine overhead per task = (wall − Σ in-task time) / N with 1 worker, which
  includes submission, scheduling, result transfer and the status-table
  rewrite after each object;
* round-trip latency of an empty task (submit → result, one at a time);
* the load average before and after, and the fits' CPU time: wall ≫ CPU means
  the cores were shared with other work.

The machine's cores may be shared with other work; the numbers are only as
good as the idle capacity while it runs.  On Linux with scheduler autogroups
(``/proc/sys/kernel/sched_autogroup_enabled`` = 1) every process of one
session shares one CPU share, so on a busy machine the workers of a
LocalCluster (all in the benchmark's session) cannot get more CPU than one
process would.  ``--own-sessions`` starts the scheduler and each worker as
separate ``dask scheduler`` / ``dask worker`` processes in sessions of their
own (as on a real cluster, where workers are independent processes) and
connects to them by address, the ``--scheduler`` path of ``retrieve batch``.
"""
from __future__ import annotations

import argparse
import contextlib
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _warm():
    """Import what a fit needs, once per worker process."""
    import retrieve.forward_model  # noqa: F401
    import retrieve.inference.run  # noqa: F401
    import retrieve.survey.batch  # noqa: F401
    return True


def _noop(x):
    return x


@contextlib.contextmanager
def own_session_cluster(n_workers: int, folder: Path):
    """Scheduler and workers as separate processes, each in a new session; yields the scheduler address."""
    sched_file = folder / f"scheduler_{n_workers}.json"
    sched_file.unlink(missing_ok=True)
    py = sys.executable
    procs = [subprocess.Popen([py, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1", "--port", "0",
                               "--no-dashboard", "--scheduler-file", str(sched_file)], start_new_session=True,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)]
    try:
        t_end = time.monotonic() + 120
        while not sched_file.is_file() and time.monotonic() < t_end:
            time.sleep(0.1)
        for _ in range(n_workers):
            procs.append(subprocess.Popen([py, "-m", "distributed.cli.dask_worker", "--scheduler-file", str(sched_file),
                                           "--nthreads", "1", "--nworkers", "1", "--host", "127.0.0.1",
                                           "--no-dashboard"], start_new_session=True,
                                          stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
        yield json.loads(sched_file.read_text())["address"]
    finally:
        for proc in reversed(procs):   # only the processes started here, by pid
            proc.terminate()
        for proc in reversed(procs):
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()


@contextlib.contextmanager
def make_client(n_workers: int, folder: Path, own_sessions: bool):
    from distributed import Client, LocalCluster
    if own_sessions:
        with own_session_cluster(n_workers, folder) as address, Client(address, set_as_default=False) as client:
            client.wait_for_workers(n_workers, timeout=120)
            yield client
    else:
        with LocalCluster(n_workers=n_workers, threads_per_worker=1, host="127.0.0.1", dashboard_address=None,
                          processes=True, silence_logs=40) as cluster, Client(cluster, set_as_default=False) as client:
            yield client


def one_setting(demo, folder: Path, n_workers: int, own_sessions: bool = False) -> dict:
    from retrieve.survey.batch import run_survey

    t0 = time.perf_counter()
    with make_client(n_workers, folder, own_sessions) as client:
        client.run(_warm)
        t_ready = time.perf_counter() - t0
        latency = []
        for i in range(20):
            t = time.perf_counter()
            client.submit(_noop, i, pure=False).result()
            latency.append(time.perf_counter() - t)
        result = run_survey(demo.catalogue, demo.config, folder / f"out_{n_workers}", client=client, stream=None)
    inside = [float(x) for x in result.status["elapsed_s"]]
    cpu = [float(x) for x in result.status["cpu_s"]]
    return {"workers": n_workers, "startup_s": t_ready, "wall_s": result.dispatch_s, "summary_s": result.summary_s,
            "task_sum_s": sum(inside), "cpu_sum_s": sum(cpu),
            "task_mean_s": statistics.fmean(inside), "n_failed": result.n_failed,
            "latency_ms": 1e3 * statistics.median(latency)}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--objects", type=int, default=8, help="number of tiny fits (default 8)")
    parser.add_argument("--max-steps", type=int, default=200, help="chain length of each fit (default 200)")
    parser.add_argument("--folder", help="work folder (default: a temporary one)")
    parser.add_argument("--own-sessions", action="store_true",
                        help="scheduler and workers as separate processes in their own sessions (see docstring)")
    args = parser.parse_args(argv)

    from retrieve.survey.demo import make_demo_survey
    print(f"load average before: {' '.join(f'{x:.1f}' for x in os.getloadavg())} on {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(args.folder or tmp)
        demo = make_demo_survey(folder / "demo", n_objects=args.objects, max_steps=args.max_steps,
                                check_every=50, optimiser_evaluations=300)
        rows = [one_setting(demo, folder, n, args.own_sessions) for n in (1, 2)]
    print("cluster:", "dask scheduler + dask worker processes in own sessions" if args.own_sessions
          else "LocalCluster in this session")
    for r in rows:
        print(f"{r['workers']} worker(s): start-up {r['startup_s']:.1f} s, dispatch wall {r['wall_s']:.2f} s, "
              f"summary {r['summary_s']:.2f} s, "
              f"Σ in-task {r['task_sum_s']:.2f} s (mean {r['task_mean_s']:.2f} s per fit; Σ CPU {r['cpu_sum_s']:.2f} s), "
              f"failed {r['n_failed']}, empty-task round trip {r['latency_ms']:.1f} ms")
    one, two = rows
    speedup = one["wall_s"] / two["wall_s"]
    overhead = (one["wall_s"] - one["task_sum_s"]) / args.objects
    print(f"load average after: {' '.join(f'{x:.1f}' for x in os.getloadavg())}")
    print(f"speed-up 1 -> 2 workers: {speedup:.2f}x (target >= 1.8x on 2 free cores)")
    print(f"engine overhead per task (1 worker, incl. status-table rewrite): {1e3 * overhead:.0f} ms "
          f"= {100 * overhead / one['task_mean_s']:.1f} % of a {one['task_mean_s']:.2f} s fit")
    return 0 if one["n_failed"] == two["n_failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
