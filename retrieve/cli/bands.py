"""``retrieve bands SPECTRUM …``: water and methane band depths (spectral indices) from the data alone."""
from __future__ import annotations

import argparse
import io
import math
from pathlib import Path

from ..errors import UserError


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "bands", help="tabulate water/methane spectral indices of spectra; index-index diagram",
        description="Measure the near-infrared H2O and CH4 indices of Burgasser et al. (2006) (and any "
                    "--index) on each SPECTRUM, with Monte Carlo uncertainties over the noise (covariance "
                    "where given). With --run, add the indices of the run's posterior model spectra (and "
                    "use its fitted data when no SPECTRUM is given).")
    p.add_argument("spectra", nargs="*", metavar="SPECTRUM", help="spectrum file(s), one object each")
    p.add_argument("--run", metavar="RUN_DIR", help="also tabulate the model indices of this run")
    p.add_argument("--plot", metavar="FILE", help="write the index-index diagram (PNG/PDF by extension)")
    p.add_argument("--x", default="h2o_h", metavar="INDEX", help="index on the diagram's x axis (h2o_h)")
    p.add_argument("--y", default="ch4_h", metavar="INDEX", help="index on the diagram's y axis (ch4_h)")
    p.add_argument("--out", metavar="TABLE.ecsv", help="write the table as ECSV")
    p.add_argument("--overwrite", action="store_true", help="replace an existing --out / --plot file")
    p.add_argument("--index", action="append", default=[], metavar="NAME:LO-HI/LO-HI",
                   help="user index: numerator and reference windows in µm (repeatable)")
    p.add_argument("--catalogue-bands", action="store_true",
                   help="add a depth for every catalogued band with continuum windows")
    p.add_argument("--band-catalogue", metavar="FILE", help="extra bands merged into the shipped catalogue")
    p.add_argument("--list-bands", action="store_true",
                   help="print the band catalogue (shipped + --band-catalogue) with sources and exit")
    p.add_argument("--draws", type=int, default=4000, metavar="N", help="noise realisations (4000)")
    p.add_argument("--model-draws", type=int, default=200, metavar="N", help="posterior draws with --run (200)")
    p.add_argument("--seed", type=int, default=0, metavar="S", help="seed (0)")
    p.set_defaults(func=run)


def _definitions(args):
    from ..analysis.indices import BURGASSER_2006, from_band, parse_index_spec
    defs = list(BURGASSER_2006) + [parse_index_spec(s) for s in args.index]
    if args.catalogue_bands or args.band_catalogue:
        from ..analysis.band_catalogue import load_catalogue
        defs += [from_band(b) for b in load_catalogue(args.band_catalogue) if b.continuum_um]
    names = [d.name for d in defs]
    dup = {n for n in names if names.count(n) > 1}
    if dup:
        raise UserError(f"--index: name {sorted(dup)[0]!r} is used twice; choose another name")
    return defs


def _check_target(path, overwrite: bool, option: str) -> Path:
    path = Path(path)
    if path.exists() and not overwrite:
        raise UserError(f"{option} {path}: file exists; use --overwrite to replace it")
    return path


def _axis_label(name: str) -> str:
    """``h2o_h`` → ``H2O-H index`` (Burgasser et al. 2006 naming); other names as given."""
    mol, _, band = name.partition("_")
    if mol in ("h2o", "ch4") and band in ("j", "h", "k"):
        return f"{mol.upper()}-{band.upper()} index"
    return name


def _print(table) -> None:
    cols = [c for c in table.colnames if c not in ("file",) and not c.endswith("_err")]
    width = max([len(str(v)) for v in table["name"]] + [4]) if len(table) else 4
    print(f"{'name':<{width}} {'source':<6} " + " ".join(f"{c:>14}" for c in cols[2:]))
    for r in table:
        cells = []
        for c in cols[2:]:
            v, e = r[c], r[f"{c}_err"]
            cells.append(f"{'—':>14}" if math.isnan(v) else f"{v:>7.3f}±{e:<6.3f}")
        print(f"{r['name']:<{width}} {r['source']:<6} " + " ".join(cells))


def _list_bands(path) -> int:
    from ..analysis.band_catalogue import load_catalogue
    print(f"{'molecule':<8} {'band':<8} {'centre':>7} {'window um':>13}  {'continuum um':<24} source")
    for b in load_catalogue(path):
        cont = ",".join(f"{lo:g}-{hi:g}" for lo, hi in b.continuum_um) or "-"
        print(f"{b.molecule:<8} {b.band:<8} {b.center_um:>7.3f} {b.window_lo_um:>6.3f}-{b.window_hi_um:<6.3f}  "
              f"{cont:<24} {b.source}")
    return 0


def run(args: argparse.Namespace) -> int:
    from ..analysis.indices import index_table
    if args.list_bands:
        return _list_bands(args.band_catalogue)
    from ..observations.readers import read_dataset
    from ..observations.writers import atomic_write_text
    if not args.spectra and not args.run:
        raise UserError("bands: give at least one SPECTRUM or --run RUN_DIR")
    out = _check_target(args.out, args.overwrite, "--out") if args.out else None
    plot = _check_target(args.plot, args.overwrite, "--plot") if args.plot else None
    defs = _definitions(args)
    run, names = None, None
    datasets = [read_dataset(p) for p in args.spectra]
    if args.run:
        from ..inference.rundir import load_run
        run = load_run(args.run)
        if not datasets:      # the run's fitted spectra, labelled with the run's object
            datasets = [d for d in run.object_data.datasets if d.kind == "spectrum"]
            obj = run.manifest.get("object", "object")
            names = [obj if len(datasets) == 1 else f"{obj} {d.name}" for d in datasets]
    table = index_table(datasets, defs, run=run, n_draws=args.draws, model_draws=args.model_draws,
                        seed=args.seed, names=names)
    _print(table)
    if out is not None:
        buf = io.StringIO()
        table.write(buf, format="ascii.ecsv")
        atomic_write_text(out, buf.getvalue(), overwrite=True)
        print(f"wrote {out}")
    if plot is not None:
        from ..plotting.band_diagram import plot_band_diagram
        fig = plot_band_diagram(table, x=args.x, y=args.y, name="name",
                                x_label=_axis_label(args.x), y_label=_axis_label(args.y))
        fig.savefig(plot)
        print(f"wrote {plot}")
    return 0
