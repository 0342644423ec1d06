"""``spherokin simulate``: a synthetic hot-stage stack with ground truth (and a DSC isotherm)."""

from __future__ import annotations

import argparse
import json
from dataclasses import fields

from analysis.errors import InputError
from analysis.synthetic.dsc import (
    add_dsc_cli_arguments,
    simulate_dsc_for_film,
    write_dsc_csv,
)
from analysis.synthetic.hot_stage import (
    StackParams,
    simulate_stack,
    validate_params,
    visible_nuclei,
    write_stack,
)

_OPTION_NAMES = {"n_frames": "--frames", "retardation_plate": "--retardation-plate"}
_SKIPPED_FIELDS = ("height_px", "width_px")  # given together as --size


def add_cli_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``spherokin simulate``: one per StackParams field, plus output and DSC options."""
    parser.add_argument("--out", required=True, metavar="DIR", help="output folder")
    parser.add_argument("--size", default="384x384", metavar="WxH",
                        help="frame size in px, e.g. 1024x768 or 512 (default 384x384)")
    for f in fields(StackParams):
        if f.name in _SKIPPED_FIELDS:
            continue
        flag = _OPTION_NAMES.get(f.name, "--" + f.name.replace("_", "-"))
        text = f.metadata["help"] + ("" if f.default is None else f" (default {f.default})")
        if f.type in (bool, "bool"):
            names = [flag, "--rgb"] if f.name == "retardation_plate" else [flag]
            parser.add_argument(*names, dest=f.name, action="store_true", help=text)
            continue
        kind = {"int": int, "float": float, "str": str}.get(str(f.type).split(" ")[0], float)
        parser.add_argument(flag, dest=f.name, type=kind, default=f.default,
                            choices=f.metadata.get("choices"), help=text)
    parser.add_argument("--tiff-compression", choices=("none", "zlib"), default="none",
                        help="lossless compression inside stack.tif (default none)")
    parser.add_argument("--write-maps", action="store_true",
                        help="also write truth_maps.npz (true arrival-time and owner maps)")
    add_dsc_cli_arguments(parser)
    _add_ramp_arguments(parser)


def _add_ramp_arguments(parser: argparse.ArgumentParser) -> None:
    """--ramp SPEC turns the recording into a ramp or step run (G follows T(t)); the other
    --ramp-* options set its kinetics, lag and stage log (RampParams fields)."""
    from analysis.synthetic.ramp import RampParams

    group = parser.add_argument_group("ramp or step programme (growth follows the temperature)")
    for f in fields(RampParams):
        flag = "--ramp" if f.name == "programme" else "--ramp-" + f.name.replace("_", "-")
        kind = str if f.name == "programme" else float
        group.add_argument(flag, dest="ramp_" + f.name, type=kind,
                           default=None if f.name == "programme" else f.default,
                           help=f"{f.metadata['help']} (default {f.default})")


def _parse_size(text: str) -> tuple[int, int]:
    """'WxH' or 'N' -> (height, width)."""
    try:
        parts = [int(v) for v in text.lower().replace("×", "x").split("x")]
    except ValueError:
        raise InputError(f"--size must look like 512x384 or 512, got {text!r}") from None
    if len(parts) == 1:
        parts = parts * 2
    if len(parts) != 2:
        raise InputError(f"--size must look like 512x384 or 512, got {text!r}")
    return parts[1], parts[0]


def params_from_args(args: argparse.Namespace) -> StackParams:
    """StackParams from parsed ``spherokin simulate`` options (validated)."""
    height, width = _parse_size(args.size)
    values = {f.name: getattr(args, f.name) for f in fields(StackParams) if f.name not in _SKIPPED_FIELDS}
    params = StackParams(height_px=height, width_px=width, **values)
    validate_params(params)
    return params


def _run_ramp(args, params) -> int:
    from analysis.synthetic.ramp import RampParams, simulate_ramp_stack, write_ramp

    if args.dsc:
        raise InputError("--dsc is for isothermal recordings; leave it out with --ramp")
    values = {f.name: getattr(args, "ramp_" + f.name) for f in fields(RampParams)}
    ramp = simulate_ramp_stack(RampParams(**values), params)
    out = write_ramp(ramp, args.out, compression=None if args.tiff_compression == "none" else "zlib",
                     write_maps=args.write_maps)
    temps = ramp.frame_temperature_c
    print(f"wrote {out / 'stack.tif'} and {out / 'stage_log.csv'}: {params.n_frames} frames, film "
          f"{temps[0]:.1f} -> {temps[-1]:.1f} °C, final area fraction {ramp.sim.area_fraction[-1]:.3f}; "
          f"the log's clock offset is {ramp.params.log_start_s:g} s")
    return 0


def run_cli(args: argparse.Namespace) -> int:
    """``spherokin simulate``: write stack.tif, truth.json (and a DSC export, or a stage log
    for a ramp)."""
    params = params_from_args(args)
    if getattr(args, "ramp_programme", None):
        return _run_ramp(args, params)
    dsc = simulate_dsc_for_film(params, args) if args.dsc else None
    sim = simulate_stack(params)
    out = write_stack(sim, args.out, compression=None if args.tiff_compression == "none" else "zlib",
                      write_maps=args.write_maps)
    if dsc is not None:
        semicolon = args.dsc_dialect == "semicolon"
        write_dsc_csv(dsc, out / args.dsc, delimiter=";" if semicolon else ",", decimal="," if semicolon else ".",
                      time_unit=args.dsc_time_unit, heat_flow_unit=args.dsc_heat_flow_unit,
                      sample_name=args.sample_name, temperature_c=args.temperature_c)
        truth = json.loads((out / "truth.json").read_text(encoding="utf-8"))
        truth["dsc"] = dict(dsc.truth_dict(), file=args.dsc, thickness_um=args.thickness_um)
        (out / "truth.json").write_text(json.dumps(truth, indent=1), encoding="utf-8")
    inside = sum(n["inside"] for n in visible_nuclei(sim))
    print(f"wrote {out / 'stack.tif'}: {params.n_frames} frames {params.width_px}x{params.height_px}, "
          f"{inside} nuclei inside the field, final area fraction {sim.area_fraction[-1]:.3f}")
    return 0
