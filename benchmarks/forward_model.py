"""Benchmark of one forward-model evaluation (the retrieval's hot path).

Standard case: model grid 0.9–2.5 µm from tables at R = λ/Δλ = 1000, 80
levels, six absorbers (H2O, CH4, CO, CO2, NH3, K) + H2-H2 and H2-He CIA + H⁻,
a knots T–P profile, 4 angles, one 40-channel spectrum at R = 40.

Prints evaluations per second and the ratio of one evaluation's time to one
plain read (``np.copy``) of the pre-interpolated opacity arrays it uses — a
floor set by memory bandwidth that no implementation can beat.

Uses the bundled tables in ``opacity_tables/`` when all are present; until
then it builds random-but-smooth synthetic tables (same shapes as the real
ones) in a temporary folder and says so.

Run: ``python benchmarks/forward_model.py [--evaluations N]`` (single thread:
BLAS threads are pinned to 1 below, before numpy is imported).
"""
from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

ABSORBERS = ["H2O", "CH4", "CO", "CO2", "NH3", "K"]
CIA = ["H2-H2", "H2-He"]


def synthetic_tables(folder: Path, seed: int = 0) -> None:
    """Random-but-smooth cross-section and CIA tables at R = 1000 over 0.85–2.65 µm."""
    from retrieve.opacity.table import OpacityTable, write_table

    rng = np.random.default_rng(seed)
    n_w = int(np.ceil(np.log(2.65 / 0.85) * 1000))
    wl = 0.85 * np.exp(np.arange(n_w) / 1000.0)
    t = np.geomspace(100.0, 4000.0, 15)
    p = np.logspace(-6, 3, 12)
    for s in ABSORBERS:
        bands = sum(rng.uniform(0.5, 2.0) * np.exp(-0.5 * ((wl - c) / rng.uniform(0.03, 0.15)) ** 2)
                    for c in rng.uniform(0.9, 2.5, 8))
        lines = 0.3 * np.sin(2 * np.pi * wl / rng.uniform(0.004, 0.01))
        logv = (-24.0 + 2.5 * bands + lines)[None, None, :] + 0.5 * np.log10(t / 1000)[None, :, None] \
            + 0.1 * np.log10(p)[:, None, None]
        write_table(OpacityTable("cross_section", s, wl, t, logv, pressure_bar=p,
                                 provenance={"synthetic": "benchmark"}), folder / f"{s}.xsec.h5")
    t_cia = np.geomspace(200.0, 4000.0, 10)
    for pair in CIA:
        logk = -46.0 + 0.5 * np.sin(3 * wl)[None, :] + 0.3 * np.log10(t_cia / 1000)[:, None]
        write_table(OpacityTable("cia", pair, wl, t_cia, logk, provenance={"synthetic": "benchmark"}),
                    folder / f"{pair}.cia.h5")


def bundled_complete() -> bool:
    from retrieve.opacity.opacity_set import project_opacity_dir

    d = project_opacity_dir()
    return all((d / f"{s}.xsec.h5").is_file() for s in ABSORBERS) and all(
        (d / f"{c}.cia.h5").is_file() for c in CIA)


def standard_dataset():
    from retrieve.observations.dataset import Dataset

    edges = np.geomspace(0.97, 2.35, 41)
    centres = np.sqrt(edges[1:] * edges[:-1])
    return Dataset(name="ifs", kind="spectrum", wavelength_um=centres, flux=np.ones(40), uncertainty=np.ones(40),
                   resolving_power=40.0, channel_edges_um=np.column_stack([edges[:-1], edges[1:]]))


def build_model(opacity_dir):
    from retrieve.forward_model import ForwardModel, ModelSpec

    spec = ModelSpec.from_mapping({
        "absorbers": ABSORBERS, "profile": "knots", "knot_pressures_bar": [1e-4, 1e-2, 1.0, 10.0, 100.0],
        "cia": CIA, "hminus": True, "rayleigh": False, "layers": 80, "angles": 4,
        **({"opacity_dir": str(opacity_dir)} if opacity_dir else {})}, "benchmark [model]")
    return ForwardModel(spec, [standard_dataset()])


PARAMS = {"log_g": 4.0, "radius_rjup": 1.2, "distance_pc": 20.0,
          "t_knot_0": 900.0, "t_knot_1": 1100.0, "t_knot_2": 1600.0, "t_knot_3": 2200.0, "t_knot_4": 2900.0,
          "log_vmr_H2O": -3.3, "log_vmr_CH4": -4.0, "log_vmr_CO": -3.5, "log_vmr_CO2": -7.0,
          "log_vmr_NH3": -6.0, "log_vmr_K": -7.5}


def best_mean(fn, n: int, repeats: int = 5, clock=time.process_time) -> float:
    """Smallest mean time per call over ``repeats`` batches of ``n`` calls.

    The default clock is this process's CPU time, so that time spent waiting
    for a core on a shared machine is not counted (cache sharing still is).
    """
    fn()
    best = np.inf
    for _ in range(repeats):
        t0 = clock()
        for _ in range(n):
            fn()
        best = min(best, (clock() - t0) / n)
    return best


def stage_times(model, n: int) -> dict:
    t = model.evaluate(PARAMS).temperature_K
    comp = model.chemistry.evaluate(PARAMS, t.size)
    kappa = model._kappa(t, comp)
    from retrieve.atmosphere.hydrostatics import layer_optical_depth

    dtau = layer_optical_depth(kappa, model.pressure_bar, 1e4)
    return {
        "molecular interpolation": best_mean(lambda: model.molecular.cross_sections(t), n),
        "continua (CIA, H-)": best_mean(lambda: model._continuum(t, comp), n),
        "radiative transfer": best_mean(lambda: model._radiate(t, dtau, False), n),
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--evaluations", type=int, default=100, help="evaluations per timing batch")
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        if bundled_complete():
            source, opacity_dir = "bundled tables in opacity_tables/", None
        else:
            synthetic_tables(Path(tmp))
            source, opacity_dir = "SYNTHETIC random-but-smooth tables (bundled tables not all present)", tmp
        model = build_model(opacity_dir)
    n_l = model.pressure_bar.size
    full = model.molecular.preinterpolated_arrays()
    # an evaluation reads one (T-interval) slab per level of each array: copy the same amount
    arrays = [a[:n_l] for a in full]
    per_eval = best_mean(lambda: model.evaluate(PARAMS), args.evaluations)
    wall = best_mean(lambda: model.evaluate(PARAMS), args.evaluations, clock=time.perf_counter)
    per_copy = best_mean(lambda: [np.copy(a) for a in arrays], args.evaluations)
    n_bytes = sum(a.nbytes for a in arrays)
    print(f"opacity: {source}")
    print(f"model grid: {model.wavelength_um.size} points {model.wavelength_um[0]:.3f}–{model.wavelength_um[-1]:.3f} µm, "
          f"{n_l} levels, {len(ABSORBERS)} absorbers + {len(CIA)} CIA + H-, "
          f"{model.mu.size} angles, 1 dataset of 40 channels")
    print(f"one evaluation: {per_eval * 1e3:.2f} ms CPU time  ->  {1.0 / per_eval:.0f} evaluations per second "
          f"(one core; wall clock {wall * 1e3:.2f} ms, load average {os.getloadavg()[0]:.1f})")
    print("times are the best of 5 batches, CPU time of this process")
    print(f"plain read (np.copy) of the opacity data one evaluation uses ({n_bytes / 1e6:.1f} MB of "
          f"{sum(a.nbytes for a in full) / 1e6:.0f} MB pre-interpolated): {per_copy * 1e3:.2f} ms; "
          f"evaluation / read = {per_eval / per_copy:.1f}")
    for name, sec in stage_times(model, args.evaluations).items():
        print(f"  {name:26s} {sec * 1e3:6.2f} ms")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
