"""Benchmark of the opacity builder: HITRAN parsing rate, table build time, peak memory.

Usage::

    python benchmarks/opacity_build.py                 # subset of the 20 T x 20 P grid, extrapolated
    python benchmarks/opacity_build.py --full          # the whole 20 x 20 grid (10+ minutes)
    python benchmarks/opacity_build.py --lines 200000  # fewer lines

The line list for the build is SYNTHETIC (random positions over 0.9-2.5 µm,
log-normal strengths with a Boltzmann factor, random H2/He widths), made here
with a fixed seed: speed depends on the number of lines and widths, not on
their spectroscopic truth.  Parsing uses the real HITRAN CO sample in
../shared/reference replicated to ≥ 2e6 records when present, else
synthetic records.
"""
from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from retrieve.constants import C2_CM_K
from retrieve.opacity_build.build import build_tables
from retrieve.opacity_build.grid import BuildGrid
from retrieve.opacity_build.hitran import iter_record_blocks, parse_records, read_hitran, BUILD_FIELDS
from retrieve.opacity_build.linelist import LineList
from retrieve.opacity_build.partition import TabulatedPartition

REFERENCE = Path(__file__).resolve().parents[2] / "shared" / "reference" / "hitran" / "co_hitran2020_sample.par"


def _synthetic_records(n: int, rng) -> bytes:
    """HITRAN-formatted records with random values (used when the reference sample is absent)."""
    rows = []
    for nu, s, e in zip(rng.uniform(4000, 11000, n), 10 ** rng.uniform(-30, -19, n), rng.uniform(0, 9000, n)):
        body = f" 51{nu:12.6f}{s:10.3E}{1.0:10.3E}.0700.080{e:10.4f}0.50-.001000"
        rows.append(body.ljust(146) + f"{3.0:7.1f}{1.0:7.1f}\n")
    return "".join(rows).encode()


def bench_parse(n_target: int = 2_000_000) -> tuple[int, float, float]:
    """(records, records/s parsing from memory, records/s reading a file to LineLists)."""
    rng = np.random.default_rng(1)
    block = REFERENCE.read_bytes() if REFERENCE.is_file() else _synthetic_records(5000, rng)
    reps = -(-n_target // (len(block) // 161))
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "lines.par"
        path.write_bytes(block * reps)
        records, _ = next(iter_record_blocks(path, chunk_lines=10 ** 8))
        t0 = time.process_time()  # CPU time: the machine is shared, wall time includes waiting
        parse_records(records, BUILD_FIELDS)
        t_mem = time.process_time() - t0
        n = records.shape[0]
        del records
        flat = TabulatedPartition([50.0, 5000.0], [20.0, 2000.0])
        t0 = time.process_time()
        count = sum(len(c) for c in read_hitran(path, partition=flat, isotopologues=None))
        t_file = time.process_time() - t0
    assert count == n
    return n, n / t_mem, n / t_file


def synthetic_lines(n: int, seed: int = 0) -> LineList:
    rng = np.random.default_rng(seed)
    nu = rng.uniform(1e4 / 2.5 - 25.0, 1e4 / 0.9 + 25.0, n)
    e_low = rng.exponential(2000.0, n)
    s_ref = 10 ** rng.normal(-21.0, 1.5, n) * np.exp(-C2_CM_K * e_low / 296.0)
    temps = np.geomspace(100.0, 4000.0, 60)
    return LineList("SYN", nu, e_low, 18.0, TabulatedPartition(temps, 0.3 * temps ** 1.5), strength_ref=s_ref,
                    gamma_h2=rng.uniform(0.03, 0.1, n), n_h2=rng.uniform(0.3, 0.8, n),
                    gamma_he=rng.uniform(0.02, 0.06, n), n_he=rng.uniform(0.3, 0.7, n))


def bench_build(n_lines: int, full: bool, workers: int) -> dict:
    lines = synthetic_lines(n_lines)
    temps = tuple(np.geomspace(200.0, 3000.0, 20))
    pressures = tuple(np.geomspace(1e-6, 1e3, 20))
    if not full:  # every 5th T and every 5th P (16 points spanning the grid), extrapolated
        temps, pressures = temps[::5] + temps[-1:], pressures[::5] + pressures[-1:]
    grid = BuildGrid(wavelength_range_um=(0.9, 2.5), resolving_power=1000, temperatures_K=temps,
                     pressures_bar=pressures)
    cpu0 = _cpu_seconds()
    t0 = time.perf_counter()
    build_tables(lines, grid, "SYN", ("cross_section", "ktable"), progress=True, n_workers=workers)
    elapsed = time.perf_counter() - t0
    cpu = _cpu_seconds() - cpu0
    n_points = len(temps) * len(pressures)
    return {"points": n_points, "seconds": elapsed, "per_point_wall": elapsed / n_points,
            "cpu_per_point": cpu / n_points, "full_grid_estimate": elapsed / n_points * 400,
            "full_grid_cpu_estimate": cpu / n_points * 400 / workers,
            "bins": grid.output_wavelengths().size, "fine_points": grid.fine_wavenumbers().size}


def _cpu_seconds() -> float:
    """User + system CPU time of this process and its finished workers."""
    total = 0.0
    for who in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN):
        r = resource.getrusage(who)
        total += r.ru_utime + r.ru_stime
    return total


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lines", type=float, default=1e6)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--full", action="store_true", help="build the whole 20 x 20 grid")
    parser.add_argument("--skip-parse", action="store_true")
    args = parser.parse_args(argv)
    res = bench_build(int(args.lines), args.full, args.workers)
    self_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    child_kb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    what = "measured" if args.full else f"extrapolated from {res['points']} points spanning the grid"
    print(f"build: {int(args.lines)} synthetic lines, 0.9-2.5 µm R=1000 ({res['bins']} bins, "
          f"{res['fine_points']} fine points), cross sections + k-tables, {args.workers} workers")
    print(f"  {res['points']} (T,P) points in {res['seconds']:.1f} s wall = {res['per_point_wall']:.2f} s/point; "
          f"CPU {res['cpu_per_point']:.2f} s/point")
    print(f"  20 T x 20 P table: {res['full_grid_estimate'] / 60:.1f} min wall ({what}); "
          f"{res['full_grid_cpu_estimate'] / 60:.1f} min if the {args.workers} cores were free "
          f"(CPU time / workers); target <= 10 min")
    print(f"  peak memory during the build: main process {self_kb / 1024:.0f} MB, largest worker "
          f"{child_kb / 1024:.0f} MB")
    if not args.skip_parse:
        n, rate_mem, rate_file = bench_parse()
        print(f"HITRAN parsing: {n} records; {rate_mem:.3g} records/s from memory (fields for building), "
              f"{rate_file:.3g} records/s file -> LineList chunks, per CPU second (target >= 2e6/s)")
        print(f"  peak memory including the parse test (whole {n}-record file in one buffer): "
              f"{resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
