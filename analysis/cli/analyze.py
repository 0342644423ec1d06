"""``spherokin analyze``: one stack to spherulites.csv, radii.csv, summary.json and overlay.png."""

from __future__ import annotations

import sys

from analysis.outputs import prepare_output_folder
from analysis.progress import Progress, run_to_completion
from analysis.reporting.export import write_analysis_outputs
from analysis.spherulites.pipeline import AnalysisSettings, analyze_iter
from analysis.stack.frames import open_stack


def add_cli_arguments(parser) -> None:
    """Arguments of ``spherokin analyze``."""
    parser.add_argument("stack", help="multi-page TIFF, folder of frames or video")
    parser.add_argument("--out", required=True, metavar="DIR", help="output folder")
    parser.add_argument("--um-per-px", type=float, help="pixel size in µm (overrides the file)")
    parser.add_argument("--interval-s", type=float, help="frame interval in s (overrides the file)")
    parser.add_argument("--temperature-c", type=float, help="crystallization temperature, °C")
    parser.add_argument("--thickness-um", type=float, help="film thickness, µm (for N_V = N_A / h)")
    parser.add_argument("--isothermal-start-s", type=float, default=0.0,
                        help="time on the recording clock when the sample reached Tc, s")
    parser.add_argument("--sensitivity", type=float, default=None, metavar="FRAMES",
                        help="minimum depth of a nucleus below its surroundings, frame intervals "
                             "(default 0.5; lower finds more)")
    parser.add_argument("--memory-budget-mb", type=float, default=None, metavar="MIB",
                        help="refuse stacks whose analysis needs more memory than this "
                             "(default 4096, or $SPHEROKIN_MEMORY_BUDGET_MB)")
    parser.add_argument("--geometry", choices=("film-2d", "bulk-3d"), default="film-2d",
                        help="geometry of the predicted Avrami kinetics")


class _ProgressBar:
    """A one-line progress bar on stderr, drawn only when stderr is a terminal."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.active = hasattr(self.stream, "isatty") and self.stream.isatty()
        self._last = -1

    def __call__(self, report: Progress) -> None:
        if not self.active:
            return
        percent = int(100 * min(max(report.fraction, 0.0), 1.0))
        if percent == self._last:
            return
        self._last = percent
        bar = "#" * (percent // 4) + "-" * (25 - percent // 4)
        self.stream.write(f"\r[{bar}] {percent:3d}% {report.stage[:40]:<40}")
        self.stream.flush()

    def close(self) -> None:
        if self.active:
            self.stream.write("\n")
            self.stream.flush()


def run_cli(args) -> int:
    """Run ``spherokin analyze``; InputError propagates to the CLI (exit 2)."""
    prepare_output_folder(args.out)
    stack = open_stack(args.stack, um_per_px=args.um_per_px, interval_s=args.interval_s)
    stack.require_calibration()
    settings = AnalysisSettings()
    if args.sensitivity is not None:
        settings = AnalysisSettings.from_dict({**settings.to_dict(), "sensitivity_frames": args.sensitivity},
                                          path=args.stack)
    bar = _ProgressBar()
    try:
        analysis = run_to_completion(analyze_iter(
            stack, settings=settings, isothermal_start_s=args.isothermal_start_s,
            temperature_c=args.temperature_c, thickness_um=args.thickness_um,
            geometry=args.geometry, memory_budget_mb=args.memory_budget_mb), bar)
    finally:
        bar.close()
    write_analysis_outputs(analysis.result, args.out, geometry=args.geometry,
                           arrival=analysis.arrival, stack=stack)
    result = analysis.result
    g = result.growth_rate
    g_text = "n/a" if g.value is None else f"{g.value:.4g} um/min (95 % CI {g.ci95_low:.4g}-{g.ci95_high:.4g}, n = {g.n})"
    print(f"{len(result.spherulites)} spherulites; G = {g_text}; nucleation "
          f"{result.nucleation.mode or 'n/a'}; outputs in {args.out}")
    return 0
