"""The named detection heuristics: one frozen object, each value with its reason."""

from __future__ import annotations

import threading
from dataclasses import FrozenInstanceError, fields

import numpy as np
import pytest

from analysis import heuristics
from analysis.arrival.evidence import evidence_threshold


def test_every_heuristic_states_why():
    for name, value, why in heuristics.describe():
        assert isinstance(value, (int, float)), name
        assert len(why.split()) >= 8, f"{name}: the reason is too short to explain anything"


def test_heuristics_are_frozen():
    with pytest.raises(FrozenInstanceError):
        heuristics.DEFAULT.threshold_noise_widths = 3.0


def test_override_reaches_the_analysis_and_ends_with_the_block():
    melt = np.random.default_rng(1).normal(0.0, 1.0, 10_000)
    default = evidence_threshold(melt)
    with heuristics.overridden(threshold_noise_widths=5.0) as rules:
        assert rules.threshold_noise_widths == 5.0
        lowered = evidence_threshold(melt)
    assert lowered < default
    assert evidence_threshold(melt) == default
    assert heuristics.current() is heuristics.DEFAULT


def test_override_of_an_unknown_name_is_refused():
    with pytest.raises(TypeError, match="not a detection heuristic"):
        with heuristics.overridden(no_such_threshold=1.0):
            pass


def test_override_does_not_leak_into_other_threads():
    seen = []
    with heuristics.overridden(split_cost_ratio=0.9):
        worker = threading.Thread(target=lambda: seen.append(heuristics.current().split_cost_ratio))
        worker.start()
        worker.join()
    assert seen == [heuristics.DEFAULT.split_cost_ratio]
    assert {f.name for f in fields(heuristics.DetectionHeuristics)} >= {"split_cost_ratio"}
