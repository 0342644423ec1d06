"""The review queue: doubtful detections in order, each judgement one edit."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from analysis.edits import DeleteDetection, IncludeSpherulite
from analysis.results import Spherulite
from app.microscopy.review import ReviewQueue


class _Model:
    def __init__(self, spherulites):
        self.current_index, self.selected_id, self.edits = 0, -1, []
        self._result = SimpleNamespace(spherulites=tuple(spherulites), um_per_px=1.0,
                                       spherulite=lambda k: next(s for s in spherulites if s.id == k))

    def result(self, index):
        return self._result

    def analysis(self, index):
        return SimpleNamespace(arrival=SimpleNamespace(times_s=np.arange(0.0, 300.0, 10.0)))

    def experiment(self, index):
        return SimpleNamespace(isothermal_start_s=0.0)

    def select_spherulite(self, spherulite_id):
        self.selected_id = spherulite_id

    def selected_spherulite(self):
        return None if self.selected_id < 0 else self._result.spherulite(self.selected_id)

    def push_edit(self, index, edit):
        self.edits.append(edit)


class _Viewer:
    show_rejected = False

    def __init__(self):
        self.focus = None

    def frame_count(self):
        return 30

    def focus_on(self, x, y, frame, half):
        self.focus = (x, y, frame, half)


def _spherulite(k, x, confidence, status="ok"):
    return Spherulite(k, x, 50.0, 20.0, 30.0, 30.0, 1.0, 0.99, 12, status, confidence=confidence)


@pytest.fixture
def queue(qapp):
    model = _Model([_spherulite(1, 20.0, 0.95), _spherulite(2, 80.0, 0.3), _spherulite(3, 140.0, 0.1),
                    _spherulite(4, 200.0, 0.0, "rejected")])
    tools = SimpleNamespace(tool="select", set_tool=lambda name: setattr(tools, "tool", name))
    return ReviewQueue(model, _Viewer(), tools), model


def test_next_and_previous_walk_the_doubtful_detections_least_confident_first(queue):
    review, model = queue
    assert [review.step(+1) for _ in range(3)] == [3, 2, 3]
    assert review.step(-1) == 2
    x, y, frame, _ = review._viewer.focus
    assert (x, y) == (80.0, 50.0)
    assert frame == 8  # t = 80 s: t0 20 s + half of the 60 px to the nearest neighbour at 2 s/px
    review._viewer.show_rejected = True
    assert 4 in review.queue()


def test_accept_and_reject_push_one_edit_each_naming_the_detection(queue):
    review, model = queue
    review.step(+1)
    review.accept()
    review.reject()
    assert [type(e) for e in model.edits] == [IncludeSpherulite, DeleteDetection]
    assert all(e.id == 3 for e in model.edits)


def test_split_without_two_cones_offers_the_add_nucleus_tool(queue):
    review, model = queue  # the stand-in analysis keeps no arrival times: no cones to fit
    messages = []
    review.message.connect(messages.append)
    review.split()
    assert review._tools.tool == "select" and "Select a detection" in messages[-1]
    review.step(+1)
    review.split()
    assert review._tools.tool == "add" and "#3" in messages[-1] and model.edits == []


def test_split_makes_two_spherulites_in_one_undo_step(qapp, tmp_path):
    import dataclasses

    from analysis.project.model import Experiment, new_project
    from analysis.spherulites import pipeline
    from app.core.model import ProjectModel
    from tests.analysis.test_review_split import CENTRES, merged_analysis

    analysis, _, merged_id = merged_analysis()
    experiment = Experiment(name="pair", stack_path=str(tmp_path / "never-read.tif"), temperature_c=130.0,
                            um_per_px=0.8, edits=analysis.edits)
    model = ProjectModel(dataclasses.replace(new_project(), experiments=(experiment,)))
    model.set_analysis(0, analysis, experiment)
    model.select(0)
    tools = SimpleNamespace(tool="select", set_tool=lambda name: setattr(tools, "tool", name))
    review = ReviewQueue(model, _Viewer(), tools)
    model.select_spherulite(merged_id)
    before = model.result(0)
    review.split()
    after = model.result(0)
    assert len(after.spherulites) == len(before.spherulites) + 1
    for x, y in CENTRES[:2]:
        assert min(np.hypot(s.x_px - x, s.y_px - y) for s in after.spherulites) <= 1.5
    assert [e.kind for e in model.experiment(0).edits[-2:]] == ["move_centre", "add_nucleus"]
    model.undo_stack.undo()  # one step takes the whole split back
    assert model.experiment(0).edits == analysis.edits
    assert len(model.result(0).spherulites) == len(before.spherulites)
    assert pipeline.split_nuclei(model.analysis(0), merged_id) is not None
