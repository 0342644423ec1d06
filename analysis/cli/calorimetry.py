"""``spherokin calorimetry``: isothermal DSC export to relative crystallinity and an Avrami fit."""

from __future__ import annotations

from analysis.outputs import prepare_output_folder
from analysis.kinetics.calorimetry import (
    analyze_calorimetry_file,
    write_calorimetry_outputs,
)
from analysis.settings import DEFAULT_FIT_WINDOW


def add_cli_arguments(parser) -> None:
    """Options of ``spherokin calorimetry`` (docs/design.md)."""
    parser.add_argument("file", help="delimited text export of an isothermal DSC run")
    parser.add_argument("--out", required=True, help="output directory")
    parser.add_argument("--time-col", help="time column: name or 0-based index")
    parser.add_argument("--heat-flow-col", help="heat-flow column: name or 0-based index")
    parser.add_argument("--time-unit", choices=("s", "min"), help="unit of the time column")
    parser.add_argument("--exotherm", choices=("up", "down"), help="sign of the exotherm "
                        "(default: detected)")
    default_window = ",".join(f"{100 * v:g}" for v in DEFAULT_FIT_WINDOW)
    parser.add_argument("--window", default=default_window, help="Avrami conversion window LO,HI "
                        f"in percent ({default_window}) or as fractions; default {default_window}")
    parser.add_argument("--mass-mg", type=float, help="sample mass in mg (for J/g with mW data)")
    parser.add_argument("--material", help="material name for crystallinity = dH / dH0")
    parser.add_argument("--lag-s", type=float, default=0.0, help="instrument time constant in s "
                        "for a first-order lag correction (default 0: none)")


def run_cli(args) -> int:
    prepare_output_folder(args.out)
    result = analyze_calorimetry_file(
        args.file, time_col=args.time_col, heat_flow_col=args.heat_flow_col,
        time_unit=args.time_unit, exotherm=args.exotherm or "auto", window=args.window,
        mass_mg=args.mass_mg, material=args.material, lag_s=args.lag_s)
    json_path, csv_path = write_calorimetry_outputs(result, args.out)
    fit = result.avrami
    summary = (f"n = {fit.n:.3f}, k = {fit.k_per_min_n:.4g} min^-n, t1/2 = {fit.t_half_min:.4g} min"
               if fit else f"Avrami fit failed: {fit.reason}")
    print(f"{result.path}: induction {result.induction_time_min:.4g} min; {summary}; "
          f"wrote {json_path} and {csv_path}")
    for warning in result.warnings:
        print(f"warning: {warning}")
    return 0
