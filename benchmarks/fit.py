"""Benchmark of a standard free retrieval, from start to convergence.

Standard case: 11 free parameters — 5 T–P knots, log g, radius, log VMRs of
H2O, CH4 and CO, and one error-inflation term — fitted to a simulated
40-channel spectrum at R ≈ 40 over 0.95–1.8 µm plus three photometric points
(2MASS J, H, Ks), distance fixed.  The data are simulated with the same
forward model and profile (80 levels, H2-H2 + H2-He CIA, H⁻, 4 angles) and
Gaussian noise (S/N 20 per channel and per photometric point).

The five knots (``--profile``) sit at fixed grey optical depths 1e-3 … 1e3
(``tau-knots``, the default), at fixed column masses (``column-knots``), at
fixed pressures 1e-4 … 100 bar (``knots``), or are expressed as T(100 bar)
plus four gradients d ln T / d ln P (``gradient``).

Sampler (defaults): optimiser + Hessian ball, then a chain pilot of 2000
steps in 4 rounds (differential-evolution moves, then pilot-mixture moves
with the mixture refitted after every round), then the recorded chain with
the pilot-mixture moves and the last mixture frozen.  ``--moves``,
``--pilot``, ``--pilot-steps``, ``--pilot-rounds`` and ``--coordinates``
select the alternatives compared in the README.

Prints the wall time to convergence (the engine's rule: chain longer than
50 τ and τ stable to 1 %, checked every ``--check-every`` steps), the number
of steps, τ, posterior evaluations per second and, with ``--moves
pilot-mixture``, the size of the pilot (``--pilot chain`` or ``nested``).

Uses the bundled tables in ``opacity_tables/`` when all are present; until
then it builds the synthetic random-but-smooth tables of
``benchmarks/forward_model.py`` in a temporary folder and says so.

Run: ``python benchmarks/fit.py [--workers 2] [--max-steps 40000] [--seed 0]
[--moves pilot-mixture|differential-evolution|stretch] [--pilot chain|nested]
[--pilot-steps 2000] [--pilot-rounds 4] [--coordinates physical|unbounded]
[--check-every 50] [--profile tau-knots|column-knots|knots|gradient] [--keep RUN_DIR]``.
"""
from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

ABSORBERS = ["H2O", "CH4", "CO"]
CIA = ["H2-H2", "H2-He"]
KNOTS_BAR = [1e-4, 1e-2, 1.0, 10.0, 100.0]
FILTERS = ["twomass-J", "twomass-H", "twomass-Ks"]
TRUTH = {"log_g": 4.2, "radius_rjup": 1.15, "distance_pc": 30.0,
         "t_knot_0": 800.0, "t_knot_1": 1000.0, "t_knot_2": 1500.0, "t_knot_3": 2000.0, "t_knot_4": 2600.0,
         "log_vmr_H2O": -3.3, "log_vmr_CH4": -4.5, "log_vmr_CO": -3.6}
PRIORS = {
    "log_g": ("uniform", 3.0, 5.5), "radius_rjup": ("uniform", 0.6, 2.0),
    **{f"t_knot_{i}": ("uniform", 300.0, 3000.0) for i in range(5)},   # inside the bundled tables (300–3000 K)
    **{f"log_vmr_{s}": ("uniform", -9.0, -1.5) for s in ABSORBERS},
}

# The same five T–P degrees of freedom as d ln T / d ln P in the four bands between the knot
# pressures plus T at the deepest level (100 bar), the "gradient" profile; the truth is the
# power-law profile through the knot truth above: g_i = ln(T_i+1 / T_i) / ln(P_i+1 / P_i).
_T = [TRUTH[f"t_knot_{i}"] for i in range(5)]
GRADIENT_TRUTH = {**{k: v for k, v in TRUTH.items() if not k.startswith("t_knot")}, "t_deep": _T[-1],
                  **{f"dlnt_dlnp_{i}": float(np.log(_T[i + 1] / _T[i]) / np.log(KNOTS_BAR[i + 1] / KNOTS_BAR[i]))
                     for i in range(4)}}
GRADIENT_PRIORS = {**{k: v for k, v in PRIORS.items() if not k.startswith("t_knot")},
                   "t_deep": ("uniform", 300.0, 3000.0),
                   **{f"dlnt_dlnp_{i}": ("uniform", -0.1, 0.4) for i in range(4)}}
# The same five knot temperatures at fixed column mass m = P / g, the "column-knots" profile; the
# round columns sit at the pressures of KNOTS_BAR when log g = 4 (m = P / g), i.e. at 1.6× those
# pressures for the truth's log g = 4.2.  The data are simulated with this profile.
KNOT_COLUMNS_G_CM2 = [p * 1e6 / 1e4 for p in KNOTS_BAR]
# ... and at fixed grey optical depth τ = κ̄ P / g, the "tau-knots" profile: the round depths sit at
# 0.35× the pressures of KNOTS_BAR for the truth's gravity and abundances (κ̄ = 0.45 cm² g⁻¹ there).
KNOT_OPTICAL_DEPTHS = [1e-3, 0.1, 10.0, 100.0, 1000.0]
PROFILES = {"knots": (TRUTH, PRIORS), "gradient": (GRADIENT_TRUTH, GRADIENT_PRIORS),
            "column-knots": (TRUTH, PRIORS), "tau-knots": (TRUTH, PRIORS)}
#: profile -> the [model] key placing its knots, and its values
KNOT_OPTIONS = {"knots": ("knot_pressures_bar", KNOTS_BAR), "gradient": ("gradient_pressures_bar", KNOTS_BAR),
                "column-knots": ("knot_columns_g_cm2", KNOT_COLUMNS_G_CM2),
                "tau-knots": ("knot_optical_depths", KNOT_OPTICAL_DEPTHS)}


def _tables(folder: Path) -> str:
    from retrieve.opacity.opacity_set import project_opacity_dir

    bundled = project_opacity_dir()
    if all((bundled / f"{s}.xsec.h5").is_file() for s in ABSORBERS) and \
            all((bundled / f"{c}.cia.h5").is_file() for c in CIA):
        return ""
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from forward_model import synthetic_tables   # the forward-model benchmark's generator

    folder.mkdir(parents=True, exist_ok=True)
    synthetic_tables(folder)
    return str(folder)


def _model_table(opacity_dir: str, layers: int, profile: str = "knots") -> dict:
    m = {"absorbers": ABSORBERS, "profile": profile, "cia": CIA,
         "hminus": True, "rayleigh": True, "layers": layers, "angles": 4}
    key, values = KNOT_OPTIONS[profile]
    m[key] = values
    if opacity_dir:
        m["opacity_dir"] = opacity_dir
    return m


def simulate(folder: Path, opacity_dir: str, layers: int, seed: int = 1,
             profile: str = "knots") -> tuple[Path, Path]:
    """Noisy 40-channel spectrum + J/H/Ks photometry from the truth; returns the two ECSV paths."""
    from retrieve.forward_model import ForwardModel, ModelSpec
    from retrieve.observations import Dataset
    from retrieve.observations.filters import filter_effective_wavelength
    from retrieve.observations.writers import write_dataset

    edges = np.geomspace(0.95, 1.8, 41)
    centres = np.sqrt(edges[1:] * edges[:-1])
    ifs = Dataset("ifs", "spectrum", centres, np.ones(40), np.ones(40), resolving_power=40.0,
                  channel_edges_um=np.column_stack([edges[:-1], edges[1:]]))
    wl = np.array([filter_effective_wavelength(f) for f in FILTERS])
    phot = Dataset("phot", "photometry", wl, np.ones(3), np.ones(3), filters=list(FILTERS))
    truth = PROFILES[profile][0]
    spec = ModelSpec.from_mapping(_model_table(opacity_dir, layers, profile), "benchmark [model]")
    out = ForwardModel(spec, [ifs, phot]).evaluate(truth).per_dataset
    rng = np.random.default_rng(seed)
    paths = []
    for ds, snr in ((ifs, 20.0), (phot, 20.0)):
        model = out[ds.name]
        sigma = model / snr
        ds.flux, ds.uncertainty = model + rng.normal(0.0, sigma), sigma
        path = folder / f"{ds.name}.ecsv"
        write_dataset(ds, path, meta={"truth": truth}, overwrite=True)
        paths.append(path)
    return paths[0], paths[1]


def config_text(opacity_dir: str, layers: int, ifs_sigma: float, max_steps: int, seed: int,
                moves: str = "stretch", check_every: int = 50, profile: str = "knots",
                pilot: str = "chain", pilot_steps: int = 2000, coordinates: str = "physical",
                pilot_rounds: int = 4) -> str:
    def val(v):
        return json.dumps(v)
    lines = ["[object]", 'name = "benchmark"', "", "[model]"]
    lines += [f"{k} = {val(v)}" for k, v in _model_table(opacity_dir, layers, profile).items()]
    lines += ["", "[parameters]", f"distance_pc = {TRUTH['distance_pc']}"]
    for name, (kind, lo, hi) in PROFILES[profile][1].items():
        lines.append(f'{name} = {{ prior = "{kind}", low = {lo}, high = {hi} }}')
    b = 2 * np.log10(ifs_sigma)
    lines.append(f'log_inflate_ifs = {{ prior = "uniform", low = {b - 4:.2f}, high = {b + 2:.2f} }}')
    lines += ["", "[[datasets]]", 'name = "ifs"', 'file = "ifs.ecsv"', "inflate_errors = true",
              "", "[[datasets]]", 'name = "phot"', 'file = "phot.ecsv"',
              "", "[sampler]", f"max_steps = {max_steps}", f"check_every = {check_every}", f"seed = {seed}",
              f'moves = "{moves}"', f'coordinates = "{coordinates}"']
    if moves == "pilot-mixture":
        lines.append(f'pilot = "{pilot}"')
        if pilot == "chain":
            lines.append(f"pilot_steps = {pilot_steps}")
            lines.append(f"pilot_rounds = {pilot_rounds}")
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--max-steps", type=int, default=40000)
    ap.add_argument("--layers", type=int, default=80)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--moves", default="pilot-mixture",
                    choices=("stretch", "differential-evolution", "pilot-mixture"),
                    help="emcee proposal ([sampler] moves); pilot-mixture adds a pilot (--pilot); "
                         "the local moves alone mix slowly along this posterior's gravity–abundance ridge")
    ap.add_argument("--pilot", default="chain", choices=("chain", "nested"),
                    help="with --moves pilot-mixture: the run the proposal mixture is fitted to")
    ap.add_argument("--pilot-steps", type=int, default=2000, help="[sampler] pilot_steps for --pilot chain")
    ap.add_argument("--pilot-rounds", type=int, default=4,
                    help="[sampler] pilot_rounds for --pilot chain: mixture refitted after each round")
    ap.add_argument("--check-every", type=int, default=50,
                    help="[sampler] check_every: steps between τ checks (the 1 %% stability test "
                         "compares consecutive checks)")
    ap.add_argument("--profile", default="tau-knots", choices=tuple(PROFILES),
                    help="T–P parametrisation of the 5 T–P parameters: knot temperatures at fixed grey "
                         "optical depths (tau-knots), column masses (column-knots) or pressures (knots), "
                         "or T(100 bar) + 4 gradients d ln T / d ln P (gradient)")
    ap.add_argument("--coordinates", default="physical", choices=("physical", "unbounded"),
                    help="[sampler] coordinates: walkers move in the parameters or in logit-mapped ones "
                         "with no prior bounds")
    ap.add_argument("--keep", metavar="RUN_DIR", help="write the run folder here (default: a temporary folder)")
    args = ap.parse_args(argv)
    from retrieve.inference import fit
    from retrieve.observations.readers import read_dataset

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        opacity_dir = _tables(tmp / "tables")
        source = "bundled tables in opacity_tables/" if not opacity_dir else \
            "SYNTHETIC random-but-smooth tables (bundled tables not all present)"
        ifs, _ = simulate(tmp, opacity_dir, args.layers, profile=args.profile)
        sigma = float(np.median(read_dataset(ifs).uncertainty))
        cfg = tmp / "fit.toml"
        cfg.write_text(config_text(opacity_dir, args.layers, sigma, args.max_steps, args.seed, args.moves,
                                  args.check_every, args.profile, args.pilot, args.pilot_steps,
                                  args.coordinates, args.pilot_rounds))
        out = Path(args.keep) if args.keep else tmp / "run"
        t0 = time.perf_counter()
        res = fit(cfg, out_dir=out, workers=args.workers, overwrite=bool(args.keep))
        wall = time.perf_counter() - t0
        manifest = json.loads((out / "manifest.json").read_text())
        print(f"opacity: {source}")
        print(f"moves: {args.moves}; coordinates: {args.coordinates}; profile: {args.profile}; "
              f"layers: {args.layers}"
              + (f"; pilot: {args.pilot}" if args.moves == "pilot-mixture" else ""))
        print(f"free parameters: {len(manifest['param_names'])} ({', '.join(manifest['param_names'])})")
        print(f"{'converged' if res.converged else 'NOT converged'} after {res.n_steps} steps x {res.n_walkers} "
              f"walkers; tau max {np.max(res.tau):.1f}; acceptance {res.acceptance_fraction:.2f}")
        print(f"wall time to {'convergence' if res.converged else 'max_steps'} on {args.workers} workers: "
              f"{wall:.1f} s ({wall / 60:.1f} min)")
        print(f"posterior evaluations: {res.n_evaluations} -> {res.evaluations_per_s:.1f} per second")
        pilot = manifest.get("pilot") or {}
        if pilot:
            print(f"pilot: {pilot['likelihood_calls']} likelihood calls, {pilot['distinct_samples']} distinct "
                  f"samples, proposal mixture of {pilot.get('mixture_components', 0)} components")
        if res.failures:
            print("evaluation failures: " + ", ".join(f"{k}: {v}" for k, v in res.failures.most_common()))
        rows = {r["name"]: r for r in res.summary}
        for name, truth in PROFILES[args.profile][0].items():
            if name in rows:
                r = rows[name]
                print(f"  {name:14s} truth {truth:9.3f}  median {r['median']:9.3f}  "
                      f"68% [{r['p16']:.3f}, {r['p84']:.3f}]")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
