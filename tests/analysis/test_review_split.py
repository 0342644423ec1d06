"""Splitting one detection into two spherulites (the review queue's split key)."""

import numpy as np
import pytest

from analysis import edits as e
from analysis.spherulites import growth, nuclei, pipeline
from tests.analysis.test_pipeline import G_PX_PER_S, G_UM_PER_MIN, arrival_from_truth

SHAPE = (160, 200)
# Two nuclei 16 px apart born together, one far away: Johnson-Mehl cones (Johnson & Mehl
# 1939, Trans. AIME 135, 416) with a common growth rate.
CENTRES = np.array([[70.0, 80.0], [86.0, 80.0], [160.0, 40.0]])
BIRTHS = np.zeros(3)


def merged_analysis():
    """Three nuclei analysed, the two close ones merged by an edit: (analysis, arrival map,
    id of the merged detection)."""
    times = np.arange(0.0, 400.0, 6.0)
    exact = growth.model_arrival_map(SHAPE, CENTRES, BIRTHS, G_PX_PER_S)
    arrival = arrival_from_truth(exact, times, noise_s=1.0, seed=3)
    analysis = pipeline.analyze_arrival(arrival)
    near = [min(analysis.result.spherulites, key=lambda s: np.hypot(s.x_px - x, s.y_px - y)) for x, y in CENTRES[:2]]
    a, b = near
    assert a.id != b.id, "the automatic analysis should have found both nuclei"
    merge = e.MergeDetections(a.x_px, a.y_px, b.x_px, b.y_px, id=a.id, other_id=b.id)
    return pipeline.apply_edits(analysis, [merge]), arrival, a.id


@pytest.fixture(scope="module")
def merged():
    return merged_analysis()


def test_split_finds_both_nuclei_of_a_merged_detection(merged):
    analysis, _, merged_id = merged
    pair = pipeline.split_nuclei(analysis, merged_id)
    assert pair is not None
    found = np.array(pair)
    for truth in CENTRES[:2]:
        assert np.min(np.hypot(*(found - truth).T)) <= 1.5  # pixel-scale fit precision (common practice)


def test_split_edits_make_two_spherulites_and_replay_after_reanalysis(merged):
    analysis, arrival, merged_id = merged
    target = analysis.result.spherulite(merged_id)
    (ax, ay), (bx, by) = pipeline.split_nuclei(analysis, merged_id)
    edits = list(analysis.edits) + [e.MoveCentre(target.x_px, target.y_px, ax, ay, id=merged_id),
                                    e.AddNucleus(bx, by)]
    split = pipeline.apply_edits(analysis, edits).result
    for x, y in CENTRES[:2]:
        best = min(split.spherulites, key=lambda s: np.hypot(s.x_px - x, s.y_px - y))
        assert np.hypot(best.x_px - x, best.y_px - y) <= 1.5
        assert best.status in ("ok", "few-points")  # 8 px of free growth before they meet
        assert abs(best.growth_rate_um_per_min / G_UM_PER_MIN - 1) <= 0.05  # loose: short free growth
    fresh = pipeline.analyze_arrival(arrival, edits=edits).result  # the project re-analysed
    assert [(s.id, round(s.x_px, 6), round(s.y_px, 6), s.status) for s in fresh.spherulites] == \
        [(s.id, round(s.x_px, 6), round(s.y_px, 6), s.status) for s in split.spherulites]


def test_one_cone_is_not_split():
    rng = np.random.default_rng(0)
    y, x = np.mgrid[0:60, 0:60]
    t = 10.0 + 4.0 * np.hypot(x - 30.2, y - 29.7) + rng.normal(0, 1.0, x.shape)
    assert nuclei.best_split(x.ravel(), y.ravel(), t.ravel(), 4.0, f_scale_s=3.0) is None
