"""Statuses agree with the numbers shown beside them; each is defined once."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from analysis.spherulites import growth, pipeline, statuses

sys.path.insert(0, str(Path(__file__).parent))
from test_pipeline import arrival_from_truth, poisson_field  # noqa: E402

BASE = dict(excluded=None, fit_ok=True, fit_reason="", marker_on_border=False, centre_inside=True,
            user_centre=False, free_radii=12, min_points=4, min_free_fraction=0.25,
            nonlinear=False, linearity="linear")


def test_every_status_has_one_entry_with_a_meaning():
    assert list(statuses.STATUSES) == ["ok", "edge", "few-points", "nonlinear", "excluded", "rejected"]
    assert all(s.meaning for s in statuses.STATUSES.values())
    assert [s.name for s in statuses.STATUSES.values() if s.pooled] == ["ok"]


@pytest.mark.parametrize("changes, status, words", [
    ({}, "ok", ""),
    ({"excluded": True}, "excluded", "excluded by you"),
    ({"excluded": False, "free_radii": 1}, "ok", "included by you"),
    ({"fit_ok": False, "fit_reason": "too few pixels"}, "few-points", "no cone fit: too few pixels"),
    ({"fit_ok": False, "marker_on_border": True}, "edge", "border"),
    ({"centre_inside": False}, "edge", "outside"),
    ({"centre_inside": False, "user_centre": True}, "ok", ""),
    ({"free_radii": 3}, "few-points", "3 free-growth radii"),
    ({"nonlinear": True, "linearity": "F-test p = 0.001"}, "nonlinear", "p = 0.001"),
])
def test_classify_names_the_number_that_decided(changes, status, words):
    verdict = statuses.classify(**{**BASE, **changes})
    assert verdict.status == status and words in verdict.reason


def test_nucleation_before_the_start_is_noted_only_beyond_its_interval():
    # 95 % CI from the t distribution (Student 1908, Biometrika 6, 1; from memory, see
    # docs/sources.md): t(0.975, 20) = 2.086
    assert statuses.early_nucleation_note(-11.0, 2.0, 20).startswith(
        "nucleated before the isothermal start: t0 = -11 ± 4 s")
    assert statuses.early_nucleation_note(-3.0, 2.0, 20) == ""  # -3 + 4.2 > 0: within the CI
    assert statuses.early_nucleation_note(5.0, 1.0, 20) == ""
    assert statuses.early_nucleation_note(-11.0, None, 20) == ""


def test_statuses_of_an_analysis_agree_with_its_numbers():
    times = np.arange(0.0, 600.0, 6.0)
    centres, births = poisson_field(5, shape=(160, 180), n=14)
    births = births - 40.0  # several nuclei formed while the sample was still cooling
    exact = growth.model_arrival_map((160, 180), centres, births, 0.25)
    analysis = pipeline.analyze_arrival(arrival_from_truth(exact, times, noise_s=2.0),
                                        isothermal_start_s=0.0)
    settings = analysis.settings
    radii = {r.id: r for r in analysis.result.radii}
    for s in analysis.result.spherulites:
        used = radii[s.id].n_used()
        assert s.status in statuses.STATUSES
        if s.status == "ok":
            assert used >= settings.min_points
        if s.status == "few-points" and s.growth_rate_um_per_min is not None:
            assert used < settings.min_points and f"{used} free-growth radii" in s.reason
        if "before the isothermal start" in s.reason:
            assert s.nucleation_time_s < 0.0
    # Nuclei born 40 s before the start and inside the field are flagged.
    inside = [(x, y) for (x, y), b in zip(centres, births) if 0 <= x < 180 and 0 <= y < 160 and b < -30]
    flagged = [s for s in analysis.result.spherulites if "before the isothermal start" in s.reason]
    assert inside and all(any(np.hypot(s.x_px - x, s.y_px - y) < 3 for s in flagged)
                          for x, y in inside)
