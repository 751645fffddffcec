"""``retrieve batch``: fit every object of a catalogue on Dask (thin layer over :func:`retrieve.survey.run_survey`)."""
from __future__ import annotations

import argparse
import logging
import sys


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "batch", help="fit every object of a survey catalogue on a Dask cluster",
        description="Fit each object of CATALOG.ecsv (columns: object, spectra; optional config, distance_pc"
                    "[_err], parallax_mas[_err], seed, fix_<parameter>) as one Dask task into SURVEY_DIR/<object>/ "
                    "(a retrieve fit run folder). Re-running skips finished objects, resumes interrupted ones and "
                    "retries failed ones. Writes survey_status.ecsv, survey_summary.ecsv and "
                    "survey_band_depths.png. Exit code 1 if any object failed.")
    parser.add_argument("catalogue", metavar="CATALOG.ecsv", help="survey catalogue (ECSV)")
    parser.add_argument("--config", required=True, metavar="FIT.toml",
                        help="fit configuration for every object (its [survey] table sets up the cluster)")
    parser.add_argument("--out", required=True, metavar="SURVEY_DIR", help="survey folder (reused on re-runs)")
    parser.add_argument("--workers", type=int, metavar="N",
                        help="local Dask worker processes, or jobs with [survey] cluster = slurm/pbs "
                             "(default: [survey] workers, else the CPU count)")
    parser.add_argument("--scheduler", metavar="ADDRESS", help="use a running Dask scheduler, e.g. tcp://host:8786")
    parser.add_argument("--max-steps", type=int, metavar="N", help="override [sampler] max_steps of every object")
    parser.add_argument("--identify", action="store_true",
                        help="after each fit, run the identification step (reduced fits, detections, band flags; "
                             "as [survey] identify = true)")
    parser.add_argument("--quiet", action="store_true", help="no progress lines")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from ..survey.batch import run_survey
    logging.basicConfig(level=logging.WARNING, format="retrieve: %(message)s")
    result = run_survey(args.catalogue, args.config, args.out, workers=args.workers, scheduler=args.scheduler,
                        max_steps=args.max_steps, stream=None if args.quiet else sys.stderr,
                        identify=True if args.identify else None)
    n = len(result.status)
    failed = result.n_failed
    print(f"{n - failed}/{n} objects finished, {failed} failed, in {result.elapsed_s:.1f} s")
    for row in result.status:
        if row["status"] != "finished":
            print(f"  {row['object']}: {row['error']}")
    print(f"summary: {result.out_dir / 'survey_summary.ecsv'}")
    if result.figure is not None:
        print(f"band-depth figure: {result.figure}")
    sys.stdout.flush()
    return 1 if failed else 0
