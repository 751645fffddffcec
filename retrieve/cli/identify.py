"""``retrieve identify RUN_DIR``: detection significance, abundance class and band flags per molecule."""
from __future__ import annotations

import argparse
import logging
import math


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "identify", help="which molecules are detected: Bayes factors, abundance classes, flagged bands",
        description="For each absorber with a free log VMR in the finished run RUN_DIR, fit the same "
                    "configuration with that molecule removed (log VMR fixed at 1e-30), estimate both "
                    "evidences by bridge sampling, convert the Bayes factor to an equivalent significance, "
                    "classify the abundance posterior and flag the molecule's catalogued bands. Writes "
                    "RUN_DIR/detections.ecsv and RUN_DIR/bands.ecsv; reduced fits go to RUN_DIR/identify/.")
    p.add_argument("run_dir", metavar="RUN_DIR", help="run folder written by 'retrieve fit'")
    p.add_argument("--workers", type=int, default=1, metavar="N", help="reduced fits run in parallel (default 1)")
    p.add_argument("--max-steps", type=int, metavar="N",
                   help="cap the reduced fits' emcee steps (default: the steps the full fit took)")
    p.add_argument("--molecules", metavar="LIST", help="comma-separated subset, e.g. H2O,CH4 (default: all)")
    p.add_argument("--band-catalogue", metavar="FILE", help="extra bands (TOML, layout of retrieve/data/bands.toml)")
    p.add_argument("--band-draws", type=int, default=60, metavar="N", help="posterior draws for band flags (60)")
    p.add_argument("--proposal-draws", type=int, metavar="N",
                   help="bridge-sampling proposal draws (default: as many as posterior samples used)")
    p.add_argument("--proposal", choices=("normal", "t", "mixture"), default="normal",
                   help="bridge-sampling proposal: multivariate normal (default), Student t, or a Gaussian "
                        "mixture for multimodal posteriors")
    p.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the evidence and band draws (0)")
    p.add_argument("--refit", action="store_true", help="redo reduced fits even if finished ones exist")
    p.add_argument("--nested", type=int, default=0, metavar="NLIVE",
                   help="also estimate the evidences with dynesty nested sampling using NLIVE live points "
                        "(cross-check; needs dynesty)")
    p.set_defaults(func=run)


def _fmt(v, spec=".2f") -> str:
    return "—" if v is None or (isinstance(v, float) and math.isnan(v)) else format(v, spec)


def run(args: argparse.Namespace) -> int:
    from ..analysis.identify import identify
    from ..analysis.significance import CAVEAT
    logging.basicConfig(level=logging.WARNING, format="retrieve: %(message)s")
    molecules = [m.strip() for m in args.molecules.split(",") if m.strip()] if args.molecules else None
    res = identify(args.run_dir, workers=args.workers, max_steps=args.max_steps, molecules=molecules,
                   band_catalogue=args.band_catalogue, n_proposal=args.proposal_draws,
                   band_draws=args.band_draws, seed=args.seed, refit=args.refit,
                   nested_live_points=args.nested, proposal=args.proposal)
    print(f"{'molecule':<9} {'ln B':>9} {'±':>6} {'sigma':>6}  {'abundance':<14} log VMR")
    for r in res.detections:
        if r["abundance_class"] == "upper limit":
            vmr = f"< {_fmt(r['upper_limit_95'])} (95%)"
        elif r["abundance_class"] == "lower limit":
            vmr = f"> {_fmt(r['lower_limit_95'])} (95%)"
        else:
            vmr = f"{_fmt(r['log_vmr_median'])} [{_fmt(r['log_vmr_lo'])}, {_fmt(r['log_vmr_hi'])}]"
        print(f"{r['molecule']:<9} {r['ln_bayes_factor']:>9.2f} {r['ln_bayes_factor_err']:>6.2f} "
              f"{r['significance_sigma']:>6.1f}  {r['abundance_class']:<14} {vmr}")
        if args.nested:
            print(f"{'':<9} nested sampling: ln B = {r['ln_bayes_factor_nested']:.2f} "
                  f"± {r['ln_bayes_factor_nested_err']:.2f}")
    flagged = [b for b in res.bands if b["flag"] in ("detected", "tentative")]
    if flagged:
        print("bands:")
        for b in flagged:
            print(f"  {b['molecule']:<6} {b['band']:<8} {b['flag']:<10} {b['significance_sigma']:5.1f} sigma  "
                  f"channels {b['channels'] or '—'}")
    for m, why in res.skipped.items():
        print(f"skipped {m}: {why}")
    print(f"caveat: {CAVEAT}")
    print(f"wrote {res.run_dir / 'detections.ecsv'} and {res.run_dir / 'bands.ecsv'}")
    return 0
