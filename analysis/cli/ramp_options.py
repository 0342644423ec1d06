"""Options of ``spherokin analyze`` for a ramp or step run: the temperature log or typed
programme, its clock offset and sensor lag, and the Lauritzen-Hoffman constants."""

from __future__ import annotations

from analysis.errors import InputError
from analysis.settings import DEFAULT_U_STAR_J_PER_MOL


def add_ramp_arguments(parser) -> None:
    group = parser.add_argument_group(
        "ramp or step programme (G over a temperature range from one run)")
    source = group.add_mutually_exclusive_group()
    source.add_argument("--temperature-log", metavar="LOG",
                        help="stage temperature log (delimited text: time and temperature columns)")
    source.add_argument("--temperature-programme", metavar="SPEC",
                        help="typed block programme 'START, RATE:END, hold:SECONDS, ...' "
                             "(°C, K/min, °C, s), e.g. '140, 5:110'")
    group.add_argument("--log-time-col", metavar="C", help="log time column, name or 0-based index")
    group.add_argument("--log-temperature-col", metavar="C",
                       help="log temperature column, name or 0-based index")
    group.add_argument("--log-time-unit", choices=("s", "min", "h"),
                       help="log time unit (default: from the header, else s)")
    group.add_argument("--log-temperature-unit", choices=("C", "K"),
                       help="log temperature unit (default: from the header, else °C)")
    group.add_argument("--clock-offset-s", type=float, default=0.0,
                       help="added to log times (or the programme start) to give the recording "
                            "clock, s (default 0)")
    group.add_argument("--sensor-lag-s", type=float, default=0.0,
                       help="first-order lag of the film behind the stage sensor, s (default 0)")
    group.add_argument("--tm0-c", type=float, help="Tm0 for the Lauritzen-Hoffman fit of the ramp, °C")
    group.add_argument("--tg-c", type=float, help="Tg for the Lauritzen-Hoffman fit of the ramp, °C")
    group.add_argument("--u-star-j-mol", type=float, default=DEFAULT_U_STAR_J_PER_MOL,
                       help=f"U*, J/mol (default {DEFAULT_U_STAR_J_PER_MOL:g})")
    group.add_argument("--t-inf-c", type=float, help="T_inf, °C (default Tg - 30 K)")


def programme_from_args(args):
    """The TemperatureProgramme the options describe, or None for an isothermal run."""
    from analysis.kinetics.temperature_programme import (
        parse_programme,
        programme_from_segments,
        read_temperature_log,
    )

    if args.temperature_log:
        return read_temperature_log(args.temperature_log, time_col=args.log_time_col,
                                    temperature_col=args.log_temperature_col,
                                    time_unit=args.log_time_unit, temperature_unit=args.log_temperature_unit,
                                    clock_offset_s=args.clock_offset_s, lag_s=args.sensor_lag_s)
    if args.temperature_programme:
        start, segments = parse_programme(args.temperature_programme)
        return programme_from_segments(start, segments, start_s=args.clock_offset_s, lag_s=args.sensor_lag_s)
    return None


def constants_from_args(args):
    from analysis.kinetics.lauritzen_hoffman import LHConstants

    if args.tm0_c is None and args.tg_c is None:
        return None
    if args.tm0_c is None or args.tg_c is None:
        raise InputError("the Lauritzen-Hoffman fit of a ramp needs both --tm0-c and --tg-c")
    return LHConstants(args.tm0_c, args.tg_c, args.u_star_j_mol, args.t_inf_c)
