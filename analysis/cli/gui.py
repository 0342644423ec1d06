"""``spherokin gui``: open the desktop application.

The application is found through the ``spherokin.frontends`` entry point, so that
``analysis`` never imports the Qt application.
"""

from __future__ import annotations

import sys
from importlib import metadata


def add_cli_arguments(parser) -> None:
    parser.add_argument("project", nargs="?", help="project file (*.spherokin.json) to open")
    parser.add_argument("--screenshot", metavar="PNG", help="open, analyse, save a window screenshot, exit")
    parser.add_argument("--view", metavar="NAME", help="view to show (viewer, kinetics, temperature)")


def run_cli(args) -> int:
    if args.screenshot:
        from analysis.outputs import prepare_output_file

        prepare_output_file(args.screenshot)
    entry_points = metadata.entry_points(group="spherokin.frontends")
    gui = next((ep for ep in entry_points if ep.name == "gui"), None)
    if gui is None:
        print("spherokin gui: the desktop application is not installed", file=sys.stderr)
        return 2
    return int(gui.load()(args) or 0)
