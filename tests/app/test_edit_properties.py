"""Random correction sessions on small simulated fields, through the model's undo stack.

Each example clicks a random sequence of corrections (add, delete, merge, move, exclude /
include, ignore frames) and undo / redo the way the tools do, on a pre-analysed arrival
map, and checks after every step that

- a nucleus added by hand sits exactly at the clicked point, a moved centre exactly at
  the new point, under the id the edit gave it;
- every detection the edit did not name keeps its id and its centre exactly (a
  territory re-partition may change its fit, never where it is);
- undo restores the earlier result exactly and redo the later one;

and at the end that the same edit list replayed on a fresh analysis of the map, and read
back from a saved project, gives the same detections. The fields are Johnson-Mehl
tessellations (Johnson & Mehl 1939, Trans. AIME 135, 416) drawn by
``analysis.spherulites.growth.model_arrival_map``; the checks are exact identities of the
replay, not physical values, so they need no tolerance.
"""

from __future__ import annotations

import dataclasses
import math
import types

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analysis.edits import (
    AddNucleus,
    DeleteDetection,
    ExcludeSpherulite,
    IgnoreFrames,
    IncludeSpherulite,
    MergeDetections,
    MoveCentre,
    target_ids,
)
from analysis.project.file import Experiment, load_project, new_project, save_project
from analysis.spherulites import growth, pipeline
from app.core.model import ProjectModel

SHAPE = (72, 84)
TIMES_S = np.arange(0.0, 240.0, 6.0)


def _arrival(seed: int):
    """A small field: nuclei inside and just outside it, born over the first minute."""
    rng = np.random.default_rng(seed)
    h, w = SHAPE
    centres = rng.uniform([-8, -8], [w + 8, h + 8], (8, 2))
    births = rng.uniform(0.0, 60.0, 8)
    exact = growth.model_arrival_map(SHAPE, centres, births, 0.25)
    noisy = exact + rng.normal(0.0, 1.5, exact.shape)
    idx = np.searchsorted(TIMES_S, noisy)
    never = idx >= TIMES_S.size
    arrival = np.where(never, np.inf, TIMES_S[np.minimum(idx, TIMES_S.size - 1)])
    return types.SimpleNamespace(
        arrival_s=arrival.astype(np.float32), frame_index=np.where(never, -1, idx).astype(np.int32),
        crystalline_at_start=idx == 0, shifts_px=np.zeros((TIMES_S.size, 2)), times_s=TIMES_S,
        um_per_px=0.8)


def _analyse(arrival):
    return pipeline.analyze_arrival(arrival, temperature_c=130.0, thickness_um=20.0)


@pytest.fixture(scope="module")
def fields():
    arrivals = [_arrival(seed) for seed in (3, 17)]
    return [(arrival, _analyse(arrival)) for arrival in arrivals]


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("sessions")


# ------------------------------------------------------------------ comparing results
def _same_value(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (math.isnan(a) and math.isnan(b))
    if isinstance(a, np.ndarray):
        return isinstance(b, np.ndarray) and a.shape == b.shape and np.array_equal(a, b, equal_nan=a.dtype.kind == "f")
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        return type(a) is type(b) and all(_same_value(getattr(a, f.name), getattr(b, f.name))
                                          for f in dataclasses.fields(a))
    if isinstance(a, (tuple, list)):
        return len(a) == len(b) and all(_same_value(x, y) for x, y in zip(a, b))
    return a == b


def _same_result(a, b) -> bool:
    fields = ("spherulites", "radii", "growth_rate", "nucleation", "unapplied_edits", "warnings")
    return all(_same_value(getattr(a, name), getattr(b, name)) for name in fields)


def _centres(result) -> dict:
    return {s.id: (s.x_px, s.y_px) for s in result.spherulites}


# ------------------------------------------------------------------ one click, as the tools make it
def _click(action, result, frames: int):
    """The edit one random gesture makes (None when it cannot be made)."""
    kind, a, b, dx, dy, span = action
    spherulites = result.spherulites
    h, w = SHAPE
    if kind == "add":
        return AddNucleus(round(a * (w - 1), 1), round(b * (h - 1), 1), id=result.next_detection_id())
    if kind == "ignore all":
        first = int(a * (frames - 3))
        return IgnoreFrames(first, first + span)
    if not spherulites:
        return None
    s = spherulites[int(a * len(spherulites)) % len(spherulites)]
    if kind == "delete":
        return DeleteDetection(s.x_px, s.y_px, id=s.id)
    if kind == "exclude":
        cls = IncludeSpherulite if s.status == "excluded" else ExcludeSpherulite
        return cls(s.x_px, s.y_px, id=s.id)
    if kind == "ignore one":
        first = int(b * (frames - 3))
        return IgnoreFrames(first, first + span, s.x_px, s.y_px, id=s.id)
    if kind == "move":
        x = min(max(s.x_px + dx, 0.0), w - 1.0)
        y = min(max(s.y_px + dy, 0.0), h - 1.0)
        return MoveCentre(s.x_px, s.y_px, round(x, 1), round(y, 1), id=s.id)
    other = spherulites[int(b * len(spherulites)) % len(spherulites)]
    if other.id == s.id:
        return None
    return MergeDetections(s.x_px, s.y_px, other.x_px, other.y_px, id=s.id, other_id=other.id)


unit = st.floats(0.0, 0.999)
offset = st.floats(-6.0, 6.0).map(lambda v: round(v, 1))
gestures = st.tuples(
    st.sampled_from(["add", "delete", "merge", "move", "exclude", "ignore one", "ignore all"]),
    unit, unit, offset, offset, st.integers(0, 2))
steps = st.lists(st.one_of(gestures, st.sampled_from(["undo", "redo"])), min_size=1, max_size=6)


# ------------------------------------------------------------------ invariants of one edit
def _check_edit(edit, before, after, freed: set) -> None:
    """What one applied edit may change: only the detections it names."""
    named = set(target_ids(edit))
    if edit.kind != "add_nucleus":  # a click on melt adds nothing; a named target is always found
        assert edit not in after.unapplied_edits
    old, new = _centres(before), _centres(after)
    for det_id, xy in old.items():
        if det_id in named or det_id in freed:
            continue
        assert new.get(det_id) == xy, f"{edit} moved or removed detection {det_id}"
    if edit.kind == "add_nucleus" and edit not in after.unapplied_edits:
        assert new[edit.id] == (edit.x_px, edit.y_px)
        assert after.spherulite(edit.id).source == "manual"
    if edit.kind == "move_centre":
        assert new[edit.id] == (edit.new_x_px, edit.new_y_px)
    if edit.kind == "delete_detection":
        assert edit.id not in new
    if edit.kind == "merge_detections":
        assert edit.other_id not in new and edit.id in new
    gone = set(old) - set(new)
    assert gone <= named


def _session(analysis, tmp):
    experiment = Experiment(name="field", stack_path=str(tmp / "never-read.tif"),
                            temperature_c=130.0, um_per_px=0.8, thickness_um=20.0)
    model = ProjectModel(dataclasses.replace(new_project(), experiments=(experiment,)))
    model.set_analysis(0, analysis, experiment)
    return model


@settings(max_examples=250, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(which=st.integers(0, 1), actions=steps)
def test_random_correction_sessions_keep_identities(qapp, fields, folder, which, actions):
    arrival, analysis = fields[which]
    model = _session(analysis, folder)
    stack = model.undo_stack
    results = [model.result(0)]  # results[k]: after the first k entries of the undo stack
    freed: list[set] = [set()]  # merged territories: their centre is fitted afresh
    for action in actions:
        before = model.result(0)
        if action == "undo":
            if stack.canUndo():
                stack.undo()
                assert _same_result(model.result(0), results[stack.index()])
            continue
        if action == "redo":
            if stack.canRedo():
                stack.redo()
                assert _same_result(model.result(0), results[stack.index()])
            continue
        edit = _click(action, before, arrival.times_s.size)
        if edit is None:
            continue
        model.push_edit(0, edit)
        after = model.result(0)
        _check_edit(edit, before, after, freed[stack.index() - 1])
        del results[stack.index():], freed[stack.index():]
        results.append(after)
        freed.append(freed[-1] | ({edit.id} if edit.kind == "merge_detections" else set()))
    edits = model.experiment(0).edits
    final = model.result(0)
    fresh = pipeline.apply_edits(_analyse(arrival), edits)
    assert _same_result(fresh.result, final)
    saved = save_project(model.project, folder / "session.spherokin.json")
    reopened = load_project(saved.path).experiments[0].edits
    assert reopened == edits
    assert _same_result(pipeline.apply_edits(analysis, reopened).result, final)
