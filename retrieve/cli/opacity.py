"""``retrieve opacity``: build opacity tables, inspect one, list the installed ones."""
from __future__ import annotations

import argparse
import json
from pathlib import Path

from ..errors import InputFileError, OpacityTableError, UserError

KIND_SUFFIX = {"cross_section": ".xsec.h5", "ktable": ".ktable.h5", "cia": ".cia.h5"}


def register(subparsers) -> None:
    parser = subparsers.add_parser("opacity", help="build, inspect and list opacity tables",
                                   description="Build opacity tables from line lists or CIA files, "
                                               "show a table's axes and provenance, list installed tables.")
    sub = parser.add_subparsers(dest="opacity_command", metavar="ACTION")
    _register_build(sub)
    info = sub.add_parser("info", help="axes, coverage, kind, provenance and checksum of a table")
    info.add_argument("file", metavar="FILE")
    info.add_argument("--json", action="store_true", help="print the full provenance record as JSON")
    info.set_defaults(func=run_info)
    lst = sub.add_parser("list", help="installed tables in the opacity search path")
    lst.add_argument("--opacity-dir", metavar="DIR", help="folder searched first (like [model] opacity_dir)")
    lst.add_argument("--config", metavar="TOML", help="take opacity_dir from this file's [model] table")
    lst.set_defaults(func=run_list)
    parser.set_defaults(func=lambda args: (parser.print_help(), 2)[1])


def _register_build(sub) -> None:
    b = sub.add_parser("build", help="build a table from HITRAN, ExoMol or CIA input (or the built-in set)",
                       description="Build one opacity table. Grid defaults: 0.8-5 µm at R=1000, "
                                   "16 temperatures 200-3000 K, 19 pressures 1e-6-1e3 bar.")
    src = b.add_mutually_exclusive_group(required=True)
    src.add_argument("--hitran", nargs="+", metavar="PAR", help="HITRAN .par file(s), plain or .bz2")
    src.add_argument("--exomol", metavar="DEF", help="ExoMol .def file (states/trans/pf/broad beside it)")
    src.add_argument("--cia", metavar="CIA", help="HITRAN .cia file")
    src.add_argument("--builtin", action="store_true", help="regenerate the bundled tables (built-in physics)")
    b.add_argument("--out", metavar="PATH", help="output file, or folder (default: current folder)")
    b.add_argument("--species", nargs="+", metavar="NAME",
                   help="absorber name for the table (default from the input); with --builtin: which ones")
    b.add_argument("--kind", choices=("xsec", "ktable", "both"), default="xsec",
                   help="cross sections, correlated-k or both (default xsec)")
    b.add_argument("--wavelength-range", nargs=2, type=float, metavar=("LOW", "HIGH"), default=(0.8, 5.0))
    b.add_argument("--resolving-power", type=float, default=1000.0, metavar="R")
    b.add_argument("--temperatures", metavar="LIST", help="T in K: 'a,b,c' or 'low:high:n' (log-spaced)")
    b.add_argument("--pressures", metavar="LIST", help="P in bar: 'a,b,c' or 'low:high:n' (log-spaced)")
    b.add_argument("--wing-cutoff", type=float, default=25.0, metavar="CM", help="line wing cut-off, cm^-1")
    b.add_argument("--fine-resolution", type=float, default=0.01, metavar="CM", help="fine grid step, cm^-1")
    b.add_argument("--g-points", type=int, default=16, metavar="N", help="Gauss-Legendre g-points (k-tables)")
    b.add_argument("--sample", action="store_true", help="sample cross sections at bin centres (default: bin average)")
    b.add_argument("--he-fraction", type=float, metavar="X",
                   help="He number fraction of the H2+He broadening gas (default solar)")
    b.add_argument("--isotopologues", metavar="LIST", default="1",
                   help="HITRAN isotopologue ids, e.g. '1,2', or 'all' (default 1)")
    b.add_argument("--partition", metavar="FILE", help="two-column 'T Q' partition-function file")
    b.add_argument("--air-broadening", action="store_true",
                   help="HITRAN: use gamma_air/n_air where H2/He values are absent")
    b.add_argument("--workers", type=int, default=None, metavar="N", help="processes over (T, P) (default: up to 2)")
    b.add_argument("--stream", action="store_true",
                   help="re-read the line files for every (T, P) instead of holding the lines in memory "
                        "(for inputs too big for memory; default holds them if ≤ 2e7 lines are expected)")
    b.add_argument("--date", metavar="ISO", help="fixed build date for reproducible files (else $SOURCE_DATE_EPOCH or now)")
    b.add_argument("--no-progress", action="store_true", help="no progress bar")
    b.set_defaults(func=run_build)


def _axis(text: str | None, default, option: str):
    import numpy as np

    if text is None:
        return default
    try:
        if ":" in text:
            lo, hi, n = text.split(":")
            return tuple(float(x) for x in np.geomspace(float(lo), float(hi), int(n)))
        return tuple(float(x) for x in text.split(","))
    except ValueError:
        raise UserError(f"{option}: cannot read {text!r}; give 'a,b,c' or 'low:high:n'") from None


def _grid(args):
    from ..opacity_build.grid import DEFAULT_PRESSURES_BAR, DEFAULT_TEMPERATURES_K, BuildGrid

    broadeners = None
    if args.he_fraction is not None:
        if not 0 <= args.he_fraction <= 1:
            raise UserError(f"--he-fraction: {args.he_fraction} is not within [0, 1]")
        broadeners = {"H2": 1.0 - args.he_fraction, "He": args.he_fraction}
    try:
        return BuildGrid(wavelength_range_um=tuple(args.wavelength_range), resolving_power=args.resolving_power,
                         temperatures_K=_axis(args.temperatures, DEFAULT_TEMPERATURES_K, "--temperatures"),
                         pressures_bar=_axis(args.pressures, DEFAULT_PRESSURES_BAR, "--pressures"),
                         wing_cutoff_cm=args.wing_cutoff, fine_resolution=args.fine_resolution, n_g=args.g_points,
                         reduction="sample" if args.sample else "mean", broadeners=broadeners)
    except ValueError as exc:
        raise UserError(f"opacity build: {exc}") from None


def _out_path(args, species: str, kind: str) -> Path:
    out = Path(args.out) if args.out else Path(".")
    if out.suffix == ".h5" and not out.is_dir():
        if args.kind == "both" and kind == "ktable":
            return out.with_name(out.name.replace(".xsec.h5", "").replace(".h5", "") + KIND_SUFFIX[kind])
        return out
    out.mkdir(parents=True, exist_ok=True)
    return out / f"{species}{KIND_SUFFIX[kind]}"


def run_build(args: argparse.Namespace) -> int:
    if args.builtin:
        return _run_builtin(args)
    from ..opacity.table import write_table
    from ..opacity_build.provenance import make_provenance

    grid = _grid(args)
    species = args.species[0] if args.species else None
    if args.cia:
        from ..opacity_build.cia import cia_table

        if not Path(args.cia).is_file():
            raise InputFileError(f"{args.cia}: CIA file not found")

        table = cia_table(args.cia, grid, provenance=make_provenance([args.cia], grid.as_dict(), args.date))
        path = write_table(table, _out_path(args, table.species, "cia"))
        print(f"wrote {path}")
        return 0
    for path in (args.hitran or []) + [args.exomol, args.partition]:
        if path is not None and not Path(path).is_file():
            raise InputFileError(f"{path}: input file not found")
    source, inputs, species, options = _line_source(args, species)
    from ..opacity_build.build import build_tables, default_workers

    kinds = {"xsec": ("cross_section",), "ktable": ("ktable",), "both": ("cross_section", "ktable")}[args.kind]
    if not args.stream and _expected_lines(inputs) <= STREAM_ABOVE_LINES:
        source = _hold_in_memory(source)
        if not source:
            raise UserError(f"opacity build: no {species} lines of the selected isotopologues in "
                            f"{', '.join(str(p) for p in inputs)}; check --isotopologues")
    prov = make_provenance(inputs, grid.as_dict(), args.date, extra={"reader": options})
    tables = build_tables(source, grid, species, kinds, prov, progress=not args.no_progress,
                          n_workers=args.workers or default_workers())
    for kind, table in tables.items():
        print(f"wrote {write_table(table, _out_path(args, species, kind))}")
    return 0


def _line_source(args, species):
    """(callable line source, input files, species, reader options) for --hitran / --exomol."""
    import functools

    if args.hitran:
        from ..opacity_build.hitran import HITRAN_MOLECULES, iter_record_blocks, parse_records

        isos = None if args.isotopologues.strip().lower() == "all" else _int_list(args.isotopologues)
        if species is None:
            records, _ = next(iter_record_blocks(args.hitran[0], chunk_lines=1))
            mol = int(parse_records(records[:1], ["molecule"])["molecule"][0])
            species = HITRAN_MOLECULES.get(mol, f"M{mol}")
        partition = args.partition
        if partition is None:
            from ..opacity_build.partition import get_partition_function

            partition = {i: get_partition_function(species, i) for i in (isos or [1])} if isos else None
        source = functools.partial(_hitran_chunks, tuple(args.hitran), species, isos, partition, args.air_broadening)
        options = {"format": "hitran", "isotopologues": isos or "all", "air_broadening": args.air_broadening}
        inputs = list(args.hitran) + ([args.partition] if args.partition else [])
        return source, inputs, species, options
    from ..opacity_build.exomol import _species_from_slug, read_def

    info = read_def(args.exomol)  # fail early with a clear message
    species = species or _species_from_slug(info["iso_slug"])
    source = functools.partial(_exomol_chunks, args.exomol, species, args.partition)
    folder = Path(args.exomol).parent
    inputs = [args.exomol] + sorted(str(p) for p in folder.iterdir()
                                    if p.name.startswith(info["iso_slug"] + "__")
                                    and p.suffix != ".def" and p.is_file())
    return source, inputs, species, {"format": "exomol"}


STREAM_ABOVE_LINES = 20_000_000  # ~2 GB of per-line arrays


def _expected_lines(paths) -> float:
    """Rough number of lines from file sizes: 60 bytes a line (ExoMol .trans rows; HITRAN records are
    161 bytes, so this errs towards streaming), bz2 files taken as 1/6 of their text."""
    total = 0.0
    for p in paths:
        p = Path(p)
        if p.is_file():
            total += p.stat().st_size * (6.0 if p.suffix == ".bz2" else 1.0) / 60.0  # ExoMol rows are shorter
    return total


def _hold_in_memory(source):
    """Read a chunk source once; join the chunks of each isotopologue (a list of LineLists)."""
    from ..opacity_build.linelist import concatenate

    groups: dict = {}
    for chunk in source():
        groups.setdefault(chunk.isotopologue, []).append(chunk)
    return [concatenate(chunks) for chunks in groups.values()]


def _hitran_chunks(paths, species, isos, partition, air):
    from ..opacity_build.hitran import read_hitran

    for p in paths:
        yield from read_hitran(p, species=species, isotopologues=isos, partition=partition,
                               use_air_broadening=air)


def _exomol_chunks(def_path, species, partition):
    from ..opacity_build.exomol import read_exomol

    yield from read_exomol(def_path, species=species, partition=partition)


def _int_list(text: str) -> list[int]:
    try:
        return [int(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise UserError(f"--isotopologues: cannot read {text!r}; give e.g. '1,2' or 'all'") from None


def _run_builtin(args) -> int:
    try:
        from ..opacity_build.builtin import build_all
    except ImportError as exc:
        raise UserError(f"opacity build --builtin: the built-in generators are not available ({exc})") from None
    out = Path(args.out) if args.out else None
    if out is None:
        from ..opacity.opacity_set import project_opacity_dir

        out = project_opacity_dir()
    written = build_all(out, species=args.species)
    for item in (written.values() if isinstance(written, dict) else written or []):
        print(f"wrote {item}")
    return 0


def describe_table(path) -> tuple[str, bool]:
    """Text for ``opacity info`` and whether the checksum verified."""
    from ..opacity.table import read_table

    try:
        table, ok = read_table(path, verify=True), True
    except OpacityTableError as exc:
        if "checksum" not in str(exc):
            raise
        table, ok = read_table(path, verify=False), False
    lines = [f"file:        {path}", f"kind:        {table.kind}", f"species:     {table.species}"]
    w = table.wavelength_um
    lines.append(f"wavelength:  {w[0]:.4g}-{w[-1]:.4g} µm, {w.size} bins"
                 + (f" (R≈{_resolving_power(table):.0f})" if table.wavelength_edges_um is not None else ""))
    t = table.temperature_K
    lines.append(f"temperature: {t[0]:g}-{t[-1]:g} K, {t.size} values")
    if table.pressure_bar is not None:
        p = table.pressure_bar
        lines.append(f"pressure:    {p[0]:.3g}-{p[-1]:.3g} bar, {p.size} values")
    if table.g_points is not None:
        lines.append(f"g-points:    {table.g_points.size} (Gauss-Legendre on [0, 1])")
    prov = table.provenance
    lines.append(f"built:       {prov.get('date', '?')} by {prov.get('software', '?')} {prov.get('version', '?')}")
    for item in prov.get("inputs", []):
        lines.append(f"input:       {item.get('path')} sha256 {str(item.get('sha256'))[:16]}…")
    params = prov.get("parameters", {})
    if params:
        keys = ("wing_cutoff_cm", "fine_resolution", "n_g", "reduction", "broadeners")
        shown = ", ".join(f"{k}={params[k]}" for k in keys if k in params)
        if shown:
            lines.append(f"parameters:  {shown}")
    lines.append(f"checksum:    {'OK' if ok else 'FAILED (file corrupted or edited; rebuild it)'}")
    return "\n".join(lines), ok


def _resolving_power(table) -> float:
    import numpy as np

    e = table.wavelength_edges_um
    return float(np.median(table.wavelength_um / np.diff(e)))


def run_info(args: argparse.Namespace) -> int:
    text, ok = describe_table(args.file)
    print(text)
    if args.json:
        from ..opacity.table import read_table

        print(json.dumps(read_table(args.file, verify=False).provenance, indent=2, sort_keys=True))
    return 0 if ok else 1


def run_list(args: argparse.Namespace) -> int:
    from ..opacity.opacity_set import search_path

    opacity_dir = args.opacity_dir
    if opacity_dir is None and args.config:
        opacity_dir = _opacity_dir_from_config(args.config)
    found = 0
    for folder in search_path(opacity_dir):
        files = sorted(folder.glob("*.h5")) if folder.is_dir() else []
        print(f"{folder}{'' if folder.is_dir() else '  (absent)'}")
        for path in files:
            print("  " + _one_line(path))
            found += 1
    if not found:
        print("no opacity tables found; build some with 'retrieve opacity build'")
    return 0


def _opacity_dir_from_config(path):
    import tomllib

    p = Path(path)
    try:
        cfg = tomllib.loads(p.read_text())
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise UserError(f"{p}: cannot read TOML ({exc})") from None
    value = cfg.get("model", {}).get("opacity_dir")
    if value is None:
        return None
    d = Path(value)
    return d if d.is_absolute() else p.parent / d


def _one_line(path: Path) -> str:
    """Name, kind, species and coverage from the header (no checksum pass: listing stays fast)."""
    import h5py

    try:
        with h5py.File(path, "r") as f:
            kind, species = str(f.attrs.get("kind", "?")), str(f.attrs.get("species", "?"))
            w, t = f["wavelength_um"], f["temperature_K"]
            cov = f"{w[0]:.3g}-{w[-1]:.3g} µm ({w.shape[0]} bins), {t[0]:g}-{t[-1]:g} K"
            if "pressure_bar" in f:
                p = f["pressure_bar"]
                cov += f", {p[0]:.2g}-{p[-1]:.2g} bar"
        return f"{path.name:28s} {kind:13s} {species:8s} {cov}"
    except (OSError, KeyError):
        return f"{path.name:28s} (not a readable opacity table)"
