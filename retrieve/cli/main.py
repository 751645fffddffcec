"""Entry point of the ``retrieve`` command.

Each sub-command lives in its own module in :mod:`retrieve.cli` exposing
``register(subparsers)``, which adds a parser and sets ``func`` (a callable
taking the parsed arguments and returning an exit code).  User errors
(:class:`retrieve.errors.UserError`) become one line on stderr and exit
code 2; ``--debug`` shows the traceback instead.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from .. import __version__
from ..errors import UserError

# Sub-command modules, in the order they appear in --help.
COMMAND_MODULES = [
    "demo",
    "describe",
    "simulate",
    "fit",
    "identify",
    "bands",
    "plot",
    "report",
    "batch",
    "opacity",
]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="retrieve",
        description="Fit low-resolution near-infrared spectra of directly imaged companions.")
    parser.add_argument("--version", action="version", version=f"retrieve {__version__}")
    parser.add_argument("--debug", action="store_true", help="show full tracebacks on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        importlib.import_module(f"{__package__}.{name}").register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 2
        return int(args.func(args) or 0)
    except UserError as exc:
        if debug:
            raise
        print(f"retrieve: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("retrieve: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
