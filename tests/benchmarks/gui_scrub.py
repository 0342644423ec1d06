"""Scrub speed of the stack viewer: one frame change with overlays, 1-megapixel frames.

Target: < ~16 ms per frame change (draw + paint) so scrubbing stays smooth. Writes a
1024×1024 16-bit stack of 60 frames to a temporary folder, gives the viewer 80 fitted
spherulites to overlay (fronts clipped to Voronoi territories, as after an analysis), and times ``show_frame`` followed by a synchronous repaint,
from the file (cold) and from the frame cache (warm). Prints a table.

Run: ``QT_QPA_PLATFORM=offscreen .venv/bin/python tests/benchmarks/gui_scrub.py``
"""

from __future__ import annotations

import os
import statistics
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path
from types import SimpleNamespace

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402
import tifffile  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from analysis.project.file import Experiment, new_project  # noqa: E402
from analysis.results import (  # noqa: E402
    ExperimentResult,
    Nucleation,
    PooledGrowthRate,
    Spherulite,
)

SIZE, FRAMES, SPHERULITES, UM_PER_PX, INTERVAL_S = 1024, 60, 80, 0.5, 2.0


def write_stack(path: Path) -> None:
    rng = np.random.default_rng(1)
    base = rng.normal(9000, 600, (SIZE, SIZE)).astype(np.uint16)
    data = np.stack([base + np.uint16(40 * k) for k in range(FRAMES)])
    tifffile.imwrite(path, data, imagej=True, resolution=(1 / UM_PER_PX, 1 / UM_PER_PX),
                     metadata={"axes": "TYX", "unit": "um", "finterval": INTERVAL_S},
                     photometric="minisblack")


def synthetic_result(stack: str) -> ExperimentResult:
    rng = np.random.default_rng(2)
    statuses = ("ok", "ok", "ok", "edge", "few-points", "nonlinear", "excluded")
    spherulites = tuple(
        Spherulite(i, float(rng.uniform(0, SIZE)), float(rng.uniform(0, SIZE)),
                   float(rng.uniform(0, 60)), None, 30.0, 1.0, 0.99, 20,
                   statuses[i % len(statuses)], "manual" if i % 11 == 0 else "auto")
        for i in range(1, SPHERULITES + 1))
    return ExperimentResult(
        stack=stack, frames=FRAMES, um_per_px=UM_PER_PX, interval_s=INTERVAL_S,
        temperature_c=130.0, thickness_um=None, spherulites=spherulites, radii=(),
        growth_rate=PooledGrowthRate(30.0, 29.0, 31.0, SPHERULITES),
        nucleation=Nucleation(SPHERULITES, "athermal", None, None, None, None, None),
        area_fraction_time_s=np.zeros(0), area_fraction=np.zeros(0),
        extra={"territories": nearest_centre_labels(spherulites)})


def nearest_centre_labels(spherulites) -> np.ndarray:
    """Territories as the analysis gives them: a label image of spherulite ids (Voronoi)."""
    from scipy.spatial import cKDTree

    centres = np.array([(s.y_px, s.x_px) for s in spherulites])
    rows, cols = np.mgrid[0:SIZE, 0:SIZE]
    _, nearest = cKDTree(centres).query(np.column_stack([rows.ravel(), cols.ravel()]))
    ids = np.array([s.id for s in spherulites], dtype=np.int32)
    return ids[nearest].reshape(SIZE, SIZE)


def time_frames(viewer, frames) -> list[float]:
    durations = []
    for frame in frames:
        start = time.perf_counter()
        viewer.show_frame(frame)
        viewer._graphics.viewport().repaint()
        durations.append((time.perf_counter() - start) * 1000.0)
    return durations


def main() -> int:
    from app.core.model import STATUS_DONE, ProjectModel
    from app.microscopy.viewer import StackViewer

    app = QApplication.instance() or QApplication([])
    with tempfile.TemporaryDirectory() as scratch:
        path = Path(scratch) / "scrub.tif"
        write_stack(path)
        experiment = Experiment(name="scrub", stack_path=str(path), temperature_c=130.0)
        model = ProjectModel(replace(new_project(), experiments=(experiment,)))
        entry = model._entries[0]  # a benchmark harness: results without running analysis
        entry.analysis = SimpleNamespace(arrival=None, result=synthetic_result(str(path)))
        entry.status = STATUS_DONE
        viewer = StackViewer(model)
        viewer.resize(1100, 1000)
        viewer.show()
        app.processEvents()
        frames = list(range(FRAMES))
        rows = [("cold (read from file), overlays on", time_frames(viewer, frames)),
                ("warm (frame cache), overlays on", time_frames(viewer, frames[-20:]))]
        for name in ("fronts", "centres", "ids"):
            viewer.set_overlay_visible(name, False)
        rows.append(("warm (frame cache), overlays off", time_frames(viewer, frames[-20:])))
        print(f"viewer frame change, {SIZE}x{SIZE} uint16, {SPHERULITES} spherulites overlaid")
        print(f"{'case':38s} {'median ms':>10s} {'p90 ms':>8s} {'max ms':>8s}")
        for label, durations in rows:
            p90 = float(np.percentile(durations, 90))
            print(f"{label:38s} {statistics.median(durations):10.1f} {p90:8.1f} "
                  f"{max(durations):8.1f}")
        viewer.close()
        viewer.deleteLater()
        app.processEvents()
    return 0


if __name__ == "__main__":
    sys.exit(main())
