"""``retrieve plot RUN_DIR``: write single figures of a run (thin layer over :mod:`retrieve.plotting.run_figures`)."""
from __future__ import annotations

import argparse

from ..plotting import run_figures
from ..plotting.style import FORMATS


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "plot", help="write figures of a run folder (corner, spectrum, profile, abundances)",
        description="Write figures of a finished run: corner plot, spectrum with posterior-predictive "
                    "envelopes and residuals (flagged bands shaded when RUN_DIR/bands.ecsv exists), "
                    "T-P profile with contribution function, abundance posteriors.")
    parser.add_argument("run_dir", metavar="RUN_DIR", help="run folder written by 'retrieve fit'")
    parser.add_argument("--what", action="append", choices=run_figures.FIGURES, metavar="FIGURE",
                        help=f"figure to write ({'|'.join(run_figures.FIGURES)}); repeatable; default all")
    parser.add_argument("--format", default="png", choices=FORMATS, help="file format (default png)")
    parser.add_argument("--out", metavar="DIR", help="output folder (default RUN_DIR/figures)")
    parser.add_argument("--params", metavar="NAME,NAME", help="corner plot: only these parameters (comma-separated)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from ..inference import load_run
    from ..plotting.style import close, save_figure

    run_ = load_run(args.run_dir)
    whats = args.what or list(run_figures.FIGURES)
    out_dir = Path(args.out) if args.out else Path(args.run_dir) / "figures"
    for what in whats:
        kwargs = {"subset": [p.strip() for p in args.params.split(",") if p.strip()]} \
            if (what == "corner" and args.params) else {}
        fig = run_figures.run_figure(run_, what, **kwargs)
        path = save_figure(fig, out_dir / f"{what}.{args.format}", args.format)
        close(fig)
        print(f"{what}: {path}")
    return 0
