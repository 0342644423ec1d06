"""``spherokin analyze``: one stack to spherulites.csv, radii.csv, summary.json and overlay.png."""

from __future__ import annotations

import sys

from analysis.cli.setting_flags import (
    add_analysis_settings_arguments,
    add_spec_arguments,
    analysis_settings_from_args,
    value_of,
)
from analysis.cli.ramp_options import add_ramp_arguments, constants_from_args, programme_from_args
from analysis.outputs import prepare_output_folder
from analysis.progress import Progress, run_to_completion
from analysis.reporting.export import write_analysis_outputs
from analysis.results import COUNTS
from analysis.settings import DEFAULT_GEOMETRY, EXPERIMENT_SPECS
from analysis.spherulites.pipeline import analyze_iter
from analysis.stack.frames import open_stack


#: The experiment values ``analyze`` takes on the command line (flags named after the keys).
EXPERIMENT_FLAGS = ("um_per_px", "interval_s", "temperature_c", "thickness_um", "isothermal_start_s",
                    "geometry")


def _experiment_specs():
    by_key = {spec.key: spec for spec in EXPERIMENT_SPECS}
    return [by_key[key] for key in EXPERIMENT_FLAGS]


def add_cli_arguments(parser) -> None:
    """Arguments of ``spherokin analyze``: the stack, the output folder, then flags generated
    from the setting descriptions (experiment values, then every analysis setting)."""
    parser.add_argument("stack", help="multi-page TIFF, folder of frames or video")
    parser.add_argument("--out", required=True, metavar="DIR", help="output folder")
    add_spec_arguments(parser, _experiment_specs())
    add_analysis_settings_arguments(parser)
    parser.add_argument("--memory-budget-mb", type=float, default=None, metavar="MIB",
                        help="refuse stacks whose analysis needs more memory than this "
                             "(default: $SPHEROKIN_MEMORY_BUDGET_MB, else 3/4 of the "
                             "computer's memory)")
    add_ramp_arguments(parser)


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
    # Flags are checked before the output folder is made: a typo leaves nothing behind.
    given = {spec.key: value_of(args, spec) for spec in _experiment_specs()}
    geometry = given["geometry"] or DEFAULT_GEOMETRY
    settings = analysis_settings_from_args(args)
    programme, constants = programme_from_args(args), constants_from_args(args)
    prepare_output_folder(args.out)
    stack = open_stack(args.stack, um_per_px=given["um_per_px"], interval_s=given["interval_s"])
    stack.require_calibration()
    if programme is not None:
        programme.require_coverage(float(stack.times_s[0]), float(stack.times_s[-1]))
    bar = _ProgressBar()
    try:
        analysis = run_to_completion(analyze_iter(
            stack, settings=settings, isothermal_start_s=given["isothermal_start_s"] or 0.0,
            temperature_c=given["temperature_c"], thickness_um=given["thickness_um"],
            geometry=geometry, memory_budget_mb=args.memory_budget_mb), bar)
    finally:
        bar.close()
    write_analysis_outputs(analysis.result, args.out, geometry=geometry,
                           arrival=analysis.arrival, stack=stack)
    result = analysis.result
    g = result.growth_rate
    g_text = "n/a" if g.value is None else f"{g.value:.4g} um/min (95 % CI {g.ci95_low:.4g}-{g.ci95_high:.4g})"
    if programme is not None:
        return _ramp_outputs(analysis, programme, constants, args, given["isothermal_start_s"] or 0.0)
    counts = "; ".join(f"{COUNTS[key][0]} {value}" for key, value in result.counts().items())
    print(f"{counts}; G = {g_text}; nucleation {result.nucleation.mode or 'n/a'}; "
          f"outputs in {args.out}")
    return 0


def _ramp_outputs(analysis, programme, constants, args, time_offset_s: float) -> int:
    """G(T) and N(T) of a ramp run, written beside the per-spherulite outputs."""
    from analysis.kinetics.ramp import analyze_ramp
    from analysis.reporting.ramp_outputs import write_ramp_outputs

    ramp = analyze_ramp(analysis, programme, constants=constants, time_offset_s=time_offset_s)
    write_ramp_outputs(ramp, args.out)
    growth = ramp.growth
    if not growth:
        print(f"{len(analysis.result.spherulites)} spherulites; no G(T): {growth.reason}; "
              f"outputs in {args.out}")
        return 0
    lh = growth.lauritzen_hoffman
    kg = f"; Kg = {lh.kg_k2:.4g} ± {lh.kg_ci95:.2g} K²" if lh else ""
    print(f"{len(growth.tracks)} spherulites in G(T) over {growth.temperature_c.min():.1f}-"
          f"{growth.temperature_c.max():.1f} °C (G {growth.growth_rate_um_per_min.min():.3g}-"
          f"{growth.growth_rate_um_per_min.max():.3g} µm/min){kg}; outputs in {args.out}")
    for warning in ramp.warnings():
        print(f"warning: {warning}", file=sys.stderr)
    return 0
