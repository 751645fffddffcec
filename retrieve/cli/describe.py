"""``retrieve describe``: check and summarise spectrum / photometry files."""
from __future__ import annotations

import argparse

from ..errors import UserError
from ..observations.readers import read_dataset
from ..observations.summary import format_summary, summarize_dataset


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "describe", help="read spectra or photometry files and summarise them",
        description="Read each file as a dataset (ECSV, CSV with a units header, FITS), validate it, "
                    "and print kind, number of points, wavelength range, median S/N, resolving power "
                    "and whether a covariance is present.")
    parser.add_argument("files", nargs="+", metavar="SPECTRUM", help="dataset file(s)")
    parser.add_argument("--covariance", action="append", default=[], metavar="FILE",
                        help="covariance file for the dataset in the same position (repeat for several)")
    parser.add_argument("--kind", choices=("spectrum", "photometry"), help="override the detected kind")
    parser.add_argument("--resolving-power", type=float, metavar="R", help="resolving power λ/Δλ to assume")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if len(args.covariance) > len(args.files):
        raise UserError(f"describe: {len(args.covariance)} --covariance files for {len(args.files)} datasets; "
                        "give at most one per dataset, in the same order")
    covariances = args.covariance + [None] * (len(args.files) - len(args.covariance))
    blocks = []
    for path, cov in zip(args.files, covariances):
        dataset = read_dataset(path, kind=args.kind, covariance=cov, resolving_power=args.resolving_power)
        blocks.append(format_summary(summarize_dataset(dataset)))
    print("\n\n".join(blocks))
    return 0
