"""``spherokin info``: frames, size, dtype, calibration and times of a stack, with their sources."""

from __future__ import annotations

from analysis.stack.frames import open_stack


def add_cli_arguments(parser) -> None:
    parser.add_argument("stack", help="multi-page TIFF, folder of frames, or AVI/MP4 video")
    parser.add_argument("--um-per-px", type=float, help="pixel size in µm (overrides the file)")
    parser.add_argument("--interval-s", type=float, help="frame interval in s (overrides the file)")
    parser.add_argument("--name-pattern", help="regex with the frame time (s) in file names (folders)")


def run_cli(args) -> int:
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
