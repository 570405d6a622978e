"""The ``ratiodesk`` command line.

Each subcommand lives in the engine module that owns it; that module provides
``add_arguments_<name>(parser)`` and ``run_<name>(args) -> int``. This file only wires them up
and turns engine errors into one readable line and a non-zero exit (never a traceback).
"""
from __future__ import annotations

import argparse
import importlib
import sys
from typing import List, Optional

from .. import __version__
from ..errors import RatioDeskError

# name -> (module, one-line help)
SUBCOMMANDS = {
    "demo": ("reduction.workbook.batch", "reduce the embedded demo workbook into out/demo/ (report + results)"),
    "reduce": ("reduction.workbook.batch", "reduce a filled RatioDesk workbook (.xlsx or .ods) without LibreOffice"),
    "isochron": ("reduction.workbook.cli_fit", "fit an isochron (York regression) to a CSV of x, sx, y, sy, rho"),
    "wmean": ("reduction.workbook.cli_fit", "weighted mean of a CSV of value, sigma"),
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="ratiodesk",
                                     description="Isotope-lab data reduction: raw ratios to isochron ages.")
    parser.add_argument("--version", action="version", version=f"ratiodesk {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module, help_text) in SUBCOMMANDS.items():
        try:
            mod = importlib.import_module(module)
        except ModuleNotFoundError as exc:
            if exc.name != module:
                raise
            continue
        p = sub.add_parser(name, help=help_text, description=help_text)
        getattr(mod, f"add_arguments_{name}")(p)
        p.set_defaults(_run=getattr(mod, f"run_{name}"))
    return parser


def main(argv: Optional[List[str]] = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_run", None):
        parser.print_help()
        return 2
    try:
        return int(args._run(args) or 0)
    except RatioDeskError as exc:
        print(f"ratiodesk {args.command}: error: {exc}", file=sys.stderr)
        return 1
    except OSError as exc:
        detail = f"{exc.strerror or exc}: {exc.filename or ''}".rstrip(": ")
        print(f"ratiodesk {args.command}: error: {detail}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
