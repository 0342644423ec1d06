"""Why nuclei are missed or invented: one line per miss and per false detection.

Runs the accuracy benchmark's conditions (``accuracy.py``) from rendered frames and, for
every true nucleus without a matched detection, prints what sets it apart:

* ``gap``: distance to the nearest other true nucleus, px (close pairs merge);
* ``border``: distance to the field border, px;
* ``lead``: how many frame intervals before its birth the earliest *other* cone reached
  the nucleus's position (negative: born ahead of a front, with |lead| intervals to spare);
* ``start``: born before the first frame (already crystalline in frame 0);
* ``det``: distance to and status of the nearest detection (a merged pair shows a
  detection between the two).

With ``--cache DIR`` the arrival maps are kept, so a change to the detection after the
arrival pass is re-scored in seconds: ``python tests/benchmarks/misses.py --cache /tmp/am``.

Usage: python tests/benchmarks/misses.py [--seeds N] [--first SEED] [--conditions NAMES]
"""

from __future__ import annotations

import argparse
import pickle
import sys
import tempfile
from collections import Counter
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from accuracy import BASE, CONDITIONS, score, visible_truth  # noqa: E402

from analysis import heuristics  # noqa: E402
from analysis.spherulites.pipeline import analyze, analyze_arrival  # noqa: E402
from analysis.synthetic import hot_stage as synthetic  # noqa: E402


def arrival_of(sim, params, workdir, cache: Path | None, key: str):
    """The arrival map of the rendered stack (cached as a pickle when asked)."""
    from analysis.stack.frames import open_stack

    cached = cache / f"{key}.pkl" if cache else None
    if cached and cached.exists():
        return pickle.loads(cached.read_bytes())
    folder = synthetic.write_stack(sim, Path(workdir) / key)
    arrival = analyze(open_stack(folder / "stack.tif"),
                      isothermal_start_s=params.isothermal_start_s).arrival
    if cached:
        cached.parent.mkdir(parents=True, exist_ok=True)
        cached.write_bytes(pickle.dumps(arrival))
    return arrival


def describe(sim, result) -> tuple[list[str], list[str]]:
    """Lines for missed true nuclei and for unmatched (false) detections."""
    p = sim.params
    truth = visible_truth(sim)
    tol = max(3.0 / p.um_per_px, 2.0)
    det = [s for s in result.spherulites if -0.5 <= s.x_px <= p.width_px - 0.5
           and -0.5 <= s.y_px <= p.height_px - 0.5 and s.status not in ("edge", "rejected")]
    pairs = sorted((float(np.hypot(tx - s.x_px, ty - s.y_px)), i, k)
                   for i, s in enumerate(det) for k, (tx, ty, _) in enumerate(truth))
    used_det, used_true = set(), set()
    for dist, i, k in pairs:
        if dist <= tol and i not in used_det and k not in used_true:
            used_det.add(i)
            used_true.add(k)
    k_all = sim.kinetics
    g_px_s = p.growth_rate_um_per_min / 60.0 / p.um_per_px
    first_iso = float(sim.times_s[0]) - p.isothermal_start_s
    all_xy = [(s.x_px, s.y_px, s.status) for s in result.spherulites]
    missed = []
    for k, (tx, ty, tb) in enumerate(truth):
        if k in used_true:
            continue
        d = np.hypot(k_all.centres_yx[:, 1] - tx, k_all.centres_yx[:, 0] - ty)
        self_i = int(np.argmin(d))
        others = np.ones(d.size, bool)
        others[self_i] = False
        gap = float(d[others].min()) if others.any() else np.inf
        reach = k_all.birth_s[others] + d[others] / g_px_s
        lead = (float(reach.min()) - tb) / p.interval_s if others.any() else np.inf
        border = min(tx + 0.5, ty + 0.5, p.width_px - 0.5 - tx, p.height_px - 0.5 - ty)
        dd = [(np.hypot(x - tx, y - ty), st) for x, y, st in all_xy]
        near = min(dd) if dd else (np.inf, "-")
        missed.append(f"  MISS ({tx:6.1f},{ty:6.1f}) t={tb:7.1f}s gap={gap:5.1f} border={border:5.1f} "
                      f"lead={lead:6.1f}fr start={'Y' if tb < first_iso else 'n'} "
                      f"det={near[0]:5.1f}px {near[1]}")
    false = []
    for i, s in enumerate(det):
        if i in used_det:
            continue
        d = np.hypot(truth[:, 0] - s.x_px, truth[:, 1] - s.y_px) if truth.size else np.array([np.inf])
        false.append(f"  FALSE ({s.x_px:6.1f},{s.y_px:6.1f}) status={s.status} nearest true={d.min():5.1f}px "
                     f"G={s.growth_rate_um_per_min}")
    return missed, false


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--first", type=int, default=0)
    parser.add_argument("--conditions", help="comma-separated substrings of condition names")
    parser.add_argument("--cache", type=Path, help="folder for arrival maps (reused when present)")
    parser.add_argument("--quiet", action="store_true", help="only the per-condition summary")
    parser.add_argument("--heuristic", action="append", default=[], metavar="NAME=VALUE",
                        help="override a detection heuristic (analysis.heuristics)")
    args = parser.parse_args()
    changes = {k: float(v) for k, v in (item.split("=", 1) for item in args.heuristic)}
    with heuristics.overridden(**changes):
        return run(args)


def run(args) -> int:
    chosen = {k: v for k, v in CONDITIONS.items()
              if not args.conditions or any(c in k for c in args.conditions.split(","))}
    with tempfile.TemporaryDirectory() as workdir:
        for name, overrides in chosen.items():
            totals = Counter()
            for seed in range(args.first, args.first + args.seeds):
                params = replace(synthetic.StackParams(**BASE), **overrides, seed=seed)
                sim = synthetic.simulate_stack(params)
                key = f"{name.replace(' ', '_').replace(',', '')}_{seed}"
                arrival = arrival_of(sim, params, workdir, args.cache, key)
                result = analyze_arrival(arrival, isothermal_start_s=params.isothermal_start_s).result
                missed, false = describe(sim, result)
                s = score(sim, result)
                totals.update(true=len(visible_truth(sim)), missed=len(missed), false=len(false))
                if not args.quiet:
                    print(f"{name} seed {seed}: recall {s['recall']:.3f} precision {s['precision']:.3f} "
                          f"density {100 * s['density']:.1f} %")
                    print("\n".join(missed + false))
            print(f"== {name}: {totals['true']} true, {totals['missed']} missed, "
                  f"{totals['false']} false", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
