"""``retrieve demo``: the end-to-end demo on the invented scenario (thin layer over :func:`retrieve.demo.run.run_demo`)."""
from __future__ import annotations

import argparse


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "demo", help="simulate, fit, identify, plot and report the invented demo scenario",
        description="Run the whole chain on an invented star with two companions (an L-type and a "
                    "T-type): simulate their IFS spectra and photometry, fit them, identify molecules, "
                    "draw the figures and write an HTML report per companion. --quick uses a coarse "
                    "model and short chains (a few minutes on two cores); without it the fits run to "
                    "convergence (see examples/README.md for the settings).")
    parser.add_argument("--out", default="demo-output", metavar="DIR", help="output folder (default demo-output)")
    parser.add_argument("--quick", action="store_true", help="coarse model and short chains")
    parser.add_argument("--overwrite", action="store_true", help="replace an earlier demo output in DIR")
    parser.add_argument("--workers", type=int, metavar="N", help="processes per fit (default: 2, or fewer CPUs)")
    parser.add_argument("--companions", metavar="b,c", help="only these companions (comma-separated keys)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..demo.run import run_demo

    companions = [c.strip() for c in args.companions.split(",")] if args.companions else None
    run_demo(args.out, quick=args.quick, overwrite=args.overwrite, workers=args.workers, companions=companions,
             echo=lambda msg: print(msg, flush=True))
    return 0
