"""Speed and memory of ``analyze`` on a 300-frame 1024 x 1024 8-bit stack.

The reference is a minimal pass in the same run: read every frame, difference against
the first, threshold, label connected components with OpenCV. Prints the ratio
analyze / minimal, frames per second, peak traced memory (tracemalloc; numpy reports
its buffers to it) against the stack size, the share of the growth analysis that
starts from the arrival map, and the time of one edit replay (a click).

Usage: python tests/benchmarks/speed.py [--frames 300] [--size 1024] [--keep DIR]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import tracemalloc
from dataclasses import replace
from pathlib import Path

import cv2
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from analysis.edits import AddNucleus, DeleteDetection  # noqa: E402
from analysis.spherulites.pipeline import analyze, analyze_arrival, apply_edits  # noqa: E402
from analysis.stack.frames import open_stack  # noqa: E402
from analysis.synthetic import hot_stage as synthetic  # noqa: E402


def minimal_pass(stack) -> int:
    """Read, difference against frame 0, threshold, label: the least any analysis does."""
    first = None
    n_labels = 0
    for frame in stack.iter_frames():
        grey = frame if frame.ndim == 2 else cv2.cvtColor(frame, cv2.COLOR_RGB2GRAY)
        if first is None:
            first = grey.copy()
        mask = (cv2.absdiff(grey, first) > 20).astype(np.uint8)
        n_labels, _ = cv2.connectedComponents(mask)
    return n_labels


def measured(fn, *args, **kwargs):
    tracemalloc.start()
    tracemalloc.reset_peak()
    started = time.perf_counter()
    value = fn(*args, **kwargs)
    elapsed = time.perf_counter() - started
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return value, elapsed, peak


def timed(fn, *args) -> float:
    """Wall time of one call, untraced."""
    started = time.perf_counter()
    fn(*args)
    return time.perf_counter() - started


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--frames", type=int, default=300)
    parser.add_argument("--size", type=int, default=1024)
    parser.add_argument("--keep", help="write (or reuse) the stack in this folder")
    args = parser.parse_args()
    params = replace(synthetic.StackParams(), n_frames=args.frames, height_px=args.size,
                     width_px=args.size, interval_s=10.0, growth_rate_um_per_min=10.0,
                     n_athermal_per_mm2=120.0, seed=7)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(args.keep or tmp)
        path = folder / "stack.tif"
        if not path.exists():
            started = time.perf_counter()
            synthetic.write_stack(synthetic.simulate_stack(params), folder)
            print(f"simulated and wrote {path} in {time.perf_counter() - started:.0f} s", flush=True)
        stack = open_stack(path)
        size_mb = np.prod(stack.shape) * np.dtype(stack.dtype).itemsize / 1e6
        t_min = timed(minimal_pass, stack)
        started = time.perf_counter()
        analysis = analyze(stack)
        t_an = time.perf_counter() - started
        t_growth = timed(analyze_arrival, analysis.arrival)
        result = analysis.result
        ok = [s for s in result.spherulites if s.status == "ok"]
        target = ok[len(ok) // 2]
        t_click = timed(apply_edits, analysis, [AddNucleus(target.x_px + 25, target.y_px)])
        t_click2 = timed(apply_edits, analysis, [DeleteDetection(target.x_px, target.y_px)])
        # Memory in separate traced runs: tracemalloc slows allocation-heavy code.
        _, _, peak_min = measured(minimal_pass, stack)
        _, _, peak_an = measured(analyze, stack)
    n = len(stack)
    print(f"\nstack: {n} frames of {args.size}x{args.size} {stack.dtype} ({size_mb:.0f} MB), "
          f"{len(result.spherulites)} spherulites found\n")
    print("| step | time (s) | frames/s | peak memory (MB) |\n|---|---|---|---|")
    print(f"| minimal pass (read, difference, threshold, label) | {t_min:.1f} | {n / t_min:.1f} | "
          f"{peak_min / 1e6:.0f} |")
    print(f"| analyze (arrival map, nuclei, fits, radii, nucleation) | {t_an:.1f} | {n / t_an:.1f} | "
          f"{peak_an / 1e6:.0f} |")
    print(f"| of which growth analysis from the arrival map (analyze_arrival) | {t_growth:.1f} | | |")
    print(f"| one click: add a nucleus (apply_edits) | {t_click:.2f} | | |")
    print(f"| one click: delete a detection (apply_edits) | {t_click2:.2f} | | |")
    print(f"\nratio analyze / minimal pass: {t_an / t_min:.2f} (target <= 3); peak memory "
          f"{peak_an / 1e6:.0f} MB against a {size_mb:.0f} MB stack")
    return 0


if __name__ == "__main__":
    sys.exit(main())
