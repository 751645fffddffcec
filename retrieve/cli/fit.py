"""``retrieve fit``: run a retrieval into a run folder (thin layer over :func:`retrieve.inference.fit`)."""
from __future__ import annotations

import argparse
import logging
import sys
import warnings

from ..inference.run import fit


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "fit", help="fit spectra with the forward model and emcee; write a run folder",
        description="Run a retrieval: validate the configuration, find the posterior maximum, sample "
                    "with emcee until the autocorrelation time is stable (or --max-steps), and write "
                    "chain, samples, summaries, spectra and a manifest to RUN_DIR. "
                    "Each SPECTRUM replaces the file of the [[datasets]] entry with the same name "
                    "(NAME=PATH names it explicitly; otherwise the file's dataset_name or stem) "
                    "or is added as a new dataset.")
    parser.add_argument("spectra", nargs="*", metavar="SPECTRUM", help="dataset file(s): PATH or NAME=PATH")
    parser.add_argument("--config", required=True, metavar="FIT.toml", help="fit configuration (TOML)")
    parser.add_argument("--out", required=True, metavar="RUN_DIR", help="run folder to write")
    parser.add_argument("--resume", action="store_true", help="continue the chain in RUN_DIR/chain.h5")
    parser.add_argument("--overwrite", action="store_true", help="replace an existing run folder")
    parser.add_argument("--workers", type=int, default=1, metavar="N", help="processes (default 1)")
    parser.add_argument("--max-steps", type=int, metavar="N", help="override [sampler] max_steps")
    parser.add_argument("--seed", type=int, metavar="S", help="override [sampler] seed")
    parser.add_argument("--no-progress", action="store_true", help="hide the progress bar")
    parser.add_argument("--mpi", action="store_true",
                        help="spread walker evaluations over MPI ranks (run as mpiexec -n K retrieve fit ... "
                             "--mpi); rank 0 writes the run folder")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    logging.basicConfig(level=logging.WARNING, format="retrieve: %(message)s")
    kwargs = dict(spectra=args.spectra, out_dir=args.out, workers=args.workers, max_steps=args.max_steps,
                  seed=args.seed, resume=args.resume, overwrite=args.overwrite,
                  progress=False if args.no_progress else None)
    with warnings.catch_warnings(record=True) as caught:   # e.g. "did not converge": one tidy line each
        warnings.simplefilter("always", RuntimeWarning)
        if args.mpi:
            from ..survey.mpi_pool import mpi_fit
            result = mpi_fit(args.config, **kwargs)
        else:
            result = fit(args.config, **kwargs)
    for w in caught:
        print(f"retrieve: warning: {w.message}", file=sys.stderr)
    if result is None:  # an MPI worker rank: rank 0 reports
        return 0
    state = "converged" if result.converged else "NOT converged"
    print(f"{state} after {result.n_steps} steps × {result.n_walkers} walkers; "
          f"max τ = {max(result.tau):.1f}; acceptance {result.acceptance_fraction:.2f}; "
          f"{result.evaluations_per_s:.1f} evaluations/s")
    if result.failures:
        print("model evaluation failures: " +
              ", ".join(f"{k} ×{v}" for k, v in result.failures.most_common()))
    for row in result.summary:
        print(f"  {row['name']:<24s} {row['median']:.6g}  +{row['p84'] - row['median']:.3g} "
              f"-{row['median'] - row['p16']:.3g}")
    print(f"run folder: {result.run_dir}")
    sys.stdout.flush()
    return 0
