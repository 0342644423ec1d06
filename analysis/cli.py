"""The ``spherokin`` command line.

``spherokin`` with no arguments opens the GUI. Subcommands (see DESIGN.md, stable)::

    gui [PROJECT] [--screenshot PNG] [--view NAME]
    info STACK
    analyze STACK --out DIR [--um-per-px F] [--interval-s S] [--temperature-c T] [--thickness-um H]
    calorimetry FILE --out DIR [...]
    lauritzen-hoffman TABLE.csv --out DIR --tm0-c T --tg-c T [...]
    report PROJECT --out DIR
    simulate --out DIR [...]

Exit status: 0 success, 2 bad input (one line on stderr naming the file and the problem),
1 internal error. Each computing subcommand lives in its own module, which provides
``add_cli_arguments(parser)`` and ``run_cli(args) -> int``; this file only wires them.
The GUI is found through the ``spherokin.frontends`` entry point so that this package
never imports the Qt application.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback
from importlib import metadata

from . import __version__
from .errors import InputError

#: subcommand -> (module providing add_cli_arguments/run_cli, one-line help)
SUBCOMMANDS = {
    "analyze": ("analysis.pipeline", "analyse one stack: spherulites, growth rates, nucleation"),
    "calorimetry": ("analysis.calorimetry", "isothermal DSC: relative crystallinity and Avrami fit"),
    "lauritzen-hoffman": ("analysis.temperature_series", "secondary-nucleation fit of G(Tc)"),
    "report": ("analysis.report", "tables, fits and figures for a whole project"),
    "simulate": ("analysis.synthetic", "synthetic hot-stage stack with ground truth (+ DSC isotherm)"),
}


class _NotAvailable(Exception):
    pass


def _load_command(module_name: str):
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        if exc.name == module_name:
            return None
        raise
    if not (hasattr(module, "add_cli_arguments") and hasattr(module, "run_cli")):
        return None
    return module


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The whole parser; with ``command`` only that subcommand's module is imported.

    Importing every computing module (scipy, scikit-image, matplotlib) would cost each
    invocation most of a second, so the others get a light parser with their help line.
    """
    parser = argparse.ArgumentParser(
        prog="spherokin",
        description="Spherulite growth rates, nucleation and crystallization kinetics from "
        "hot-stage polarized-light time-lapse recordings.",
    )
    parser.add_argument("--version", action="version", version=f"spherokin {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    gui = sub.add_parser("gui", help="open the desktop application (default)")
    gui.add_argument("project", nargs="?", help="project file (*.spherokin.json) to open")
    gui.add_argument("--screenshot", metavar="PNG", help="open, analyse, save a window screenshot, exit")
    gui.add_argument("--view", metavar="NAME", help="view to show (viewer, kinetics, temperature)")
    gui.set_defaults(handler=_run_gui)

    info = sub.add_parser("info", help="frames, size, dtype, calibration and times of a stack")
    info.add_argument("stack", help="multi-page TIFF, folder of frames, or AVI/MP4 video")
    info.add_argument("--um-per-px", type=float, help="pixel size in µm (overrides the file)")
    info.add_argument("--interval-s", type=float, help="frame interval in s (overrides the file)")
    info.add_argument("--name-pattern", help="regex with the frame time (s) in file names (folders)")
    info.set_defaults(handler=_run_info)

    for name, (module_name, help_text) in SUBCOMMANDS.items():
        subparser = sub.add_parser(name, help=help_text)
        module = _load_command(module_name) if command in (None, name) else None
        if module is None:
            subparser.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
            subparser.set_defaults(handler=_not_available, command_name=name)
        else:
            module.add_cli_arguments(subparser)
            subparser.set_defaults(handler=module.run_cli)
    return parser


def _not_available(args) -> int:
    print(f"spherokin {args.command_name}: not available yet", file=sys.stderr)
    return 2


def _run_gui(args) -> int:
    entry_points = metadata.entry_points(group="spherokin.frontends")
    gui = next((ep for ep in entry_points if ep.name == "gui"), None)
    if gui is None:
        print("spherokin gui: the desktop application is not installed", file=sys.stderr)
        return 2
    return int(gui.load()(args) or 0)


def _run_info(args) -> int:
    from .frames import open_stack

    stack = open_stack(args.stack, um_per_px=args.um_per_px, interval_s=args.interval_s,
                       name_pattern=args.name_pattern)
    for line in describe_stack(stack):
        print(line)
    return 0


def describe_stack(stack) -> list[str]:
    """Human-readable lines about a stack: size, dtype, calibration, times and sources."""
    height, width = stack.frame_shape[:2]
    colour = "RGB" if stack.is_rgb else "grey"
    lines = [
        f"stack:        {stack.path} ({stack.kind})",
        f"frames:       {len(stack)}",
        f"frame size:   {width} × {height} px, {colour}, {stack.dtype}",
    ]
    if stack.um_per_px is None:
        lines.append("pixel size:   MISSING (not in the file; give --um-per-px)")
    else:
        lines.append(f"pixel size:   {stack.um_per_px:.6g} µm/px  [from {stack.sources['um_per_px']}]")
        lines.append(f"field:        {width * stack.um_per_px:.6g} × {height * stack.um_per_px:.6g} µm")
    if stack.times_s is None:
        lines.append("frame times:  MISSING (not in the file; give --interval-s)")
    else:
        source = stack.sources.get("times_s", "?")
        if stack.interval_s is not None:
            lines.append(f"interval:     {stack.interval_s:.6g} s  [from {source}]")
        else:
            lines.append(f"interval:     uneven  [times from {source}]")
        lines.append(f"time span:    {stack.times_s[0]:.6g} s to {stack.times_s[-1]:.6g} s")
    return lines


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if not argv:
        argv = ["gui"]
    parser = build_parser(argv[0] if argv[0] in SUBCOMMANDS else "")
    args = parser.parse_args(argv)
    if args.command is None:
        args = parser.parse_args(["gui", *argv])
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
