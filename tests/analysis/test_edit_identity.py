"""Edits land on the detection they name: the triple cluster of the 124 °C demo experiment.

In frame 1 of the demo's 124 °C recording three spherulites that were already crystalline
when the record started touch each other left of the centre (image px about 84-93,
132-150); the automatic analysis gives the whole cluster one detection. The user adds a
nucleus on two of them and moves the automatic detection's centre onto the third. The
positions of the three true nuclei come from the simulation that made the demo
(``sample_images/tc124/truth.json``).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from analysis.edits import AddNucleus, MoveCentre
from analysis.project.file import load_project
from analysis.spherulites.pipeline import analyze_experiment, apply_edits

DEMO = Path(__file__).resolve().parents[2] / "sample_images" / "demo.spherokin.json"


@pytest.fixture(scope="module")
def demo_124():
    if not DEMO.exists():
        pytest.skip("the demo project is not in sample_images")
    experiment = load_project(DEMO).experiments[0]
    assert experiment.temperature_c == 124.0
    truth = json.loads((DEMO.parent / "tc124" / "truth.json").read_text())
    cluster = [(n["x_px"], n["y_px"]) for n in truth["nuclei"]
               if 80 <= n["x_px"] <= 95 and 130 <= n["y_px"] <= 150]
    return analyze_experiment(experiment), cluster


def _centres(result):
    return {s.id: (s.x_px, s.y_px) for s in result.spherulites}


def test_cluster_corrections_land_where_the_user_clicked(demo_124):
    analysis, cluster = demo_124
    assert len(cluster) == 3
    automatic = analysis.result
    territories = automatic.extra["territories"]
    lowest = max(cluster, key=lambda xy: xy[1])  # the one no click adds: its centre is moved
    host = int(territories[int(round(lowest[1])), int(round(lowest[0]))])
    assert host > 0

    first = AddNucleus(84.0, 138.0, id=automatic.next_detection_id())
    one = apply_edits(analysis, [first]).result
    second = AddNucleus(93.0, 132.0, id=one.next_detection_id())
    two = apply_edits(analysis, [first, second]).result
    target = two.spherulite(host)
    move = MoveCentre(target.x_px, target.y_px, 91.0, 149.0, id=host)
    three = apply_edits(analysis, [first, second, move]).result

    assert (first.id, second.id) == (len(automatic.spherulites) + 1, len(automatic.spherulites) + 2)
    assert _centres(one)[first.id] == (84.0, 138.0)  # exactly the click, not snapped
    assert _centres(two)[first.id] == (84.0, 138.0) and _centres(two)[second.id] == (93.0, 132.0)
    assert _centres(three)[host] == (91.0, 149.0)
    assert _centres(three)[first.id] == (84.0, 138.0) and _centres(three)[second.id] == (93.0, 132.0)
    for det_id, xy in _centres(automatic).items():  # nothing else moved, nothing vanished
        for result in (one, two) if det_id == host else (one, two, three):
            assert _centres(result)[det_id] == xy
    # Each of the three true nuclei now has its own marker.
    markers = np.array([[s.x_px, s.y_px] for s in three.spherulites])
    for x, y in cluster:
        assert np.min(np.hypot(markers[:, 0] - x, markers[:, 1] - y)) < 3.5
    # The edit list replayed again (what undo / redo and reopening do) gives the same state.
    again = apply_edits(analysis, [first, second]).result
    assert [(s.id, s.x_px, s.y_px, s.status) for s in again.spherulites] == \
        [(s.id, s.x_px, s.y_px, s.status) for s in two.spherulites]
