"""``retrieve report RUN_DIR``: the self-contained HTML report (thin layer over :func:`retrieve.report.build.build_report`)."""
from __future__ import annotations

import argparse


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "report", help="write a self-contained HTML report of a run folder",
        description="Write one HTML file (figures embedded) with the inputs and settings, convergence "
                    "diagnostics, parameter table, detections and flagged bands (if 'retrieve identify' "
                    "was run), all figures and the caveats.")
    parser.add_argument("run_dir", metavar="RUN_DIR", help="run folder written by 'retrieve fit'")
    parser.add_argument("--out", metavar="FILE.html", help="output file (default RUN_DIR/report.html)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..report.build import build_report

    path = build_report(args.run_dir, out=args.out)
    print(f"report: {path}")
    return 0
