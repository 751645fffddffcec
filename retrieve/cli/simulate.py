"""``retrieve simulate CONFIG.toml --out spectrum.ecsv``: a simulated observation."""
from __future__ import annotations

import argparse


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "simulate", help="forward-model a spectrum (optionally noisy) from a configuration",
        description="Forward-model the [model]/[parameters] of CONFIG on the wavelength grid of its "
                    "[simulate] section, add noise at the given S/N, and write an ECSV dataset with "
                    "its covariance and the true parameters in the metadata.")
    p.add_argument("config", help="TOML configuration with [model], [parameters] and [simulate]")
    p.add_argument("--out", required=True, help="output ECSV file (photometry goes to <stem>_phot.ecsv)")
    p.add_argument("--seed", type=int, default=None, help="noise seed (overrides [simulate] seed)")
    p.add_argument("--overwrite", action="store_true", help="replace existing output files")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..simulate import load_and_simulate, write_simulation

    result = load_and_simulate(args.config, seed=args.seed)
    paths = write_simulation(result, args.out, overwrite=args.overwrite,
                             settings_meta={"config": str(args.config)})
    for d, path in zip(result.datasets, paths):
        print(f"wrote {path} ({d.kind}, {d.n_points} points)")
    return 0
