"""The ``spherokin`` command line.

``spherokin`` with no arguments opens the GUI. Subcommands (stable; see docs/design.md)::

    gui [PROJECT] [--screenshot PNG] [--view NAME]
    info STACK
    analyze STACK --out DIR [--um-per-px F] [--interval-s S] [--temperature-c T] [--thickness-um H]
    calorimetry FILE --out DIR [...]
    lauritzen-hoffman TABLE.csv --out DIR --tm0-c T --tg-c T [...]
    report PROJECT --out DIR
    simulate --out DIR [...]

Exit status: 0 success, 2 bad input (one line on stderr naming the file and the problem),
1 internal error. Each subcommand is one module of this package providing
``add_cli_arguments(parser)`` and ``run_cli(args) -> int``; this file only wires them and
imports only the chosen one (the computing modules load scipy, scikit-image and matplotlib,
which would cost every invocation most of a second).
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback

from analysis import __version__
from analysis.cli.quiet import captured_chatter, quiet_environment
from analysis.errors import InputError

#: subcommand -> (module in this package, one-line help)
SUBCOMMANDS = {
    "gui": ("gui", "open the desktop application (default)"),
    "info": ("info", "frames, size, dtype, calibration and times of a stack"),
    "analyze": ("analyze", "analyse one stack: spherulites, growth rates, nucleation"),
    "calorimetry": ("calorimetry", "isothermal DSC: relative crystallinity and Avrami fit"),
    "lauritzen-hoffman": ("lauritzen_hoffman", "secondary-nucleation fit of G(Tc)"),
    "report": ("report", "tables, fits and figures for a whole project"),
    "simulate": ("simulate", "synthetic hot-stage stack with ground truth (+ DSC isotherm)"),
}


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The whole parser; with ``command`` only that subcommand's module is imported."""
    parser = argparse.ArgumentParser(
        prog="spherokin",
        description="Spherulite growth rates, nucleation and crystallization kinetics from "
        "hot-stage polarized-light time-lapse recordings.",
    )
    parser.add_argument("--version", action="version", version=f"spherokin {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module_name, help_text) in SUBCOMMANDS.items():
        subparser = sub.add_parser(name, help=help_text)
        if command not in (None, name):
            subparser.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
            continue
        module = importlib.import_module(f"analysis.cli.{module_name}")
        module.add_cli_arguments(subparser)
        subparser.set_defaults(handler=module.run_cli)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if not argv or argv[0] not in SUBCOMMANDS and argv[0] not in ("-h", "--help", "--version"):
        argv = ["gui", *argv]
    quiet_environment()
    parser = build_parser(argv[0] if argv[0] in SUBCOMMANDS else "")
    args = parser.parse_args(argv)
    if args.command == "gui" and not getattr(args, "screenshot", None):
        return _run(args)  # the desktop application keeps its own stderr
    with captured_chatter() as chatter:
        status = _run(args)
    summary = chatter.summary()
    if status == 0 and summary:
        print(f"spherokin {args.command}: {summary}", file=sys.stderr)
    return status


def _run(args) -> int:
    """The chosen subcommand; bad input: one line and 2, a bug: traceback and 1."""
    try:
        return int(args.handler(args) or 0)
    except InputError as exc:
        print(f"spherokin {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"spherokin {args.command}: interrupted", file=sys.stderr)
        return 130
    except Exception:  # a bug: say so plainly, keep the traceback for the report
        traceback.print_exc()
        print(f"spherokin {args.command}: internal error (please report it with the lines above)",
              file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
