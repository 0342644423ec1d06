"""The analysis of an arrival map end to end, edits replay, settings."""

import types

import numpy as np
import pytest

from analysis import edits as e
from analysis.errors import InputError
from analysis.kinetics.prediction import film_avrami_fit, predict_from_result
from analysis.spherulites import growth, pipeline

UM_PER_PX = 0.8
G_PX_PER_S = 0.25  # 12 µm/min at 0.8 µm/px
G_UM_PER_MIN = G_PX_PER_S * UM_PER_PX * 60


def arrival_from_truth(exact, times, *, noise_s=0.0, seed=0):
    """An arrival map as a frame-by-frame pass records it: first frame at or after the
    (noisy) true arrival; already crystalline in frame 0 where the arrival precedes it."""
    rng = np.random.default_rng(seed)
    noisy = exact + rng.normal(0, noise_s, exact.shape) if noise_s else exact
    idx = np.searchsorted(times, noisy)
    never = idx >= times.size
    arrival = np.where(never, np.inf, times[np.minimum(idx, times.size - 1)]).astype(np.float32)
    return types.SimpleNamespace(
        arrival_s=arrival, frame_index=np.where(never, -1, idx).astype(np.int32),
        crystalline_at_start=idx == 0, shifts_px=np.zeros((times.size, 2)), times_s=times,
        um_per_px=UM_PER_PX)


def poisson_field(seed, *, shape=(220, 260), n=22, birth_spread_s=0.0, pad=40):
    rng = np.random.default_rng(seed)
    h, w = shape
    centres = rng.uniform([-pad, -pad], [w + pad, h + pad], (n, 2))
    births = rng.uniform(0, birth_spread_s, n) if birth_spread_s else np.zeros(n)
    return centres, births


def _matches(result, centres, births, shape, tol=3.0):
    """(spherulite, true index) pairs for true nuclei inside the field."""
    h, w = shape
    out = []
    for s in result.spherulites:
        d = np.hypot(centres[:, 0] - s.x_px, centres[:, 1] - s.y_px)
        k = int(np.argmin(d))
        if d[k] < tol:
            out.append((s, k))
    return out


@pytest.fixture(scope="module")
def field_analysis():
    times = np.arange(0.0, 600.0, 6.0)
    centres, births = poisson_field(11)
    exact = growth.model_arrival_map((220, 260), centres, births, G_PX_PER_S)
    arrival = arrival_from_truth(exact, times, noise_s=2.0)
    return pipeline.analyze_arrival(arrival, temperature_c=131.5, thickness_um=25.0), centres, births


def _in_field(centres, shape=(220, 260)):
    h, w = shape
    return (centres[:, 0] >= 0) & (centres[:, 0] <= w - 1) & (centres[:, 1] >= 0) & (centres[:, 1] <= h - 1)


def test_field_of_simultaneous_nuclei_recovers_nuclei_rate_and_birth(field_analysis):
    # Johnson-Mehl cone t = t0 + |p - c| / G per cell (Johnson & Mehl 1939, Trans. AIME
    # 135, 416). Loose versions of the accuracy targets (recall >= 0.9, median |G error|
    # <= 3 %, nucleation time within 1 frame interval) — common practice for CI guards.
    analysis, centres, births = field_analysis
    result = analysis.result
    matched = _matches(result, centres, births, (220, 260))
    inside = np.flatnonzero(_in_field(centres))
    found = {k for _, k in matched}
    assert len(found & set(inside)) / inside.size >= 0.9
    # Precision over claims: a rejected candidate (e.g. the unconfirmed half of a split
    # reaching outside the field) is listed for review but claims nothing.
    in_field = [s for s in result.spherulites if 0 <= s.x_px <= 259 and 0 <= s.y_px <= 219
                and s.status != "rejected"]
    assert sum(1 for s, _ in matched if s in in_field) / len(in_field) >= 0.9
    ok = [(s, k) for s, k in matched if s.status == "ok"]
    errors = [abs(s.growth_rate_um_per_min / G_UM_PER_MIN - 1) for s, _ in ok]
    assert np.median(errors) <= 0.03
    assert all(abs(s.nucleation_time_s - births[k]) <= 6.0 for s, k in ok)
    assert result.growth_rate.value == pytest.approx(G_UM_PER_MIN, rel=0.02)
    assert result.growth_rate.ci95_low < result.growth_rate.value < result.growth_rate.ci95_high


def test_edge_spherulites_are_flagged_and_not_counted(field_analysis):
    analysis, centres, births = field_analysis
    result = analysis.result
    edge = [s for s in result.spherulites if s.status == "edge"]
    # Outside by the fitted centre, or (no usable fit) a minimum on the field border.
    assert edge and all(not (0 <= s.x_px <= 259 and 0 <= s.y_px <= 219) or s.growth_rate_um_per_min is None
                        for s in edge)
    assert result.nucleation.count == int(np.sum(_in_field(centres)))
    assert result.nucleation.mode == "athermal"
    area_mm2 = 220 * 260 * (UM_PER_PX * 1e-3) ** 2
    assert result.nucleation.density_per_mm2 == pytest.approx(result.nucleation.count / area_mm2)
    assert result.nucleation.density_per_mm3 == pytest.approx(result.nucleation.density_per_mm2 / 0.025)


def test_area_fraction_and_film_avrami_exponent_near_two(field_analysis):
    # Projected area of an athermal film follows the 2-D law, n = 2 (projection argument in
    # Piorkowska, Galeski & Haudin 2006, Prog. Polym. Sci. 31, 549 — from memory;
    # Avrami 1940, J. Chem. Phys. 8, 212). Edge effects of a small field widen this.
    result = field_analysis[0].result
    assert np.all(np.diff(result.area_fraction) >= 0) and result.area_fraction[-1] > 0.99
    assert film_avrami_fit(result).n == pytest.approx(2.0, abs=0.35)
    assert predict_from_result(result, "film-2d").n == pytest.approx(2.0)


def test_radii_follow_the_fitted_rate(field_analysis):
    result = field_analysis[0].result
    for s in result.spherulites:
        if s.status != "ok":
            continue
        series = next(r for r in result.radii if r.id == s.id)
        t, r = series.time_s[series.used], series.radius_um[series.used]
        assert np.polyfit(t, r, 1)[0] * 60 == pytest.approx(s.growth_rate_um_per_min, rel=0.08)


def test_recording_that_starts_late_still_recovers_nucleation_time():
    times = np.arange(40.0, 500.0, 5.0)  # nuclei born at 0-10 s, first frame at 40 s
    centres = np.array([[60.0, 60.0], [170.0, 80.0], [100.0, 160.0]])
    exact = growth.model_arrival_map((200, 220), centres, [0.0, 10.0, 5.0], G_PX_PER_S)
    arrival = arrival_from_truth(exact, times, noise_s=1.0)
    assert arrival.crystalline_at_start.any()
    result = pipeline.analyze_arrival(arrival).result
    assert len(result.spherulites) == 3
    for s in result.spherulites:
        k = int(np.argmin(np.hypot(*(centres - [s.x_px, s.y_px]).T)))
        assert s.nucleation_time_s == pytest.approx([0.0, 10.0, 5.0][k], abs=5.0)
        assert s.growth_rate_um_per_min == pytest.approx(G_UM_PER_MIN, rel=0.02)


@pytest.mark.parametrize("centres, births_s", [
    # three discs of radius 12 px at the first frame, 20-23 px apart: one crystal with a
    # melt pocket at the triple point
    ([[56.0, 48.0], [76.0, 45.0], [69.0, 67.0]], [-24.0, -24.0, -24.0]),
    # a younger, smaller third disc inside the cluster
    ([[56.0, 48.0], [76.0, 45.0], [67.0, 62.0]], [-24.0, -24.0, -12.0]),
    # a chain of four
    ([[56.0, 48.0], [76.0, 45.0], [69.0, 67.0], [90.0, 62.0]], [-24.0] * 4),
])
def test_clusters_already_merged_in_the_first_frame_are_all_found(centres, births_s):
    # Johnson & Mehl 1939 (Trans. AIME 135, 416): each nucleus is the apex of an
    # arrival-time cone, so the cones measured after the first frame, continued below it,
    # locate every nucleus of a cluster that was already one crystal in that frame.
    times = np.arange(0.0, 120.0, 2.0)
    centres = np.array(centres + [[150.0, 60.0]])
    exact = growth.model_arrival_map((130, 200), centres, births_s + [-24.0], 0.5)
    arrival = arrival_from_truth(exact, times)
    result = pipeline.analyze_arrival(arrival).result
    found = np.array([(s.x_px, s.y_px) for s in result.spherulites])
    assert len(found) == len(centres)
    for cx, cy in centres:
        assert np.min(np.hypot(*(found - [cx, cy]).T)) < 3.0


def test_a_late_nucleus_hemmed_in_after_four_frames_is_located_timed_and_counted():
    # A nucleus born in the melt pocket between three fronts 60 s before they close it
    # grows for four frames only: too few for its own four-parameter cone, enough for a
    # cone at the field's growth rate (one G per temperature: Lauritzen & Hoffman 1960,
    # J. Res. Natl. Bur. Stand. 64A, 73; Johnson-Mehl cells: Johnson & Mehl 1939).
    shape = (160, 200)
    ring = [(100 + 45 * np.cos(a), 80 + 45 * np.sin(a)) for a in np.deg2rad([90, 210, 330])]
    centres = np.array(ring + [(40.0, 20.0), (160.0, 20.0), (100.0, 150.0), (100.0, 80.0)])
    late_birth = 45 / G_PX_PER_S - 60.0
    births = np.append(np.zeros(6), late_birth)
    times = np.arange(0.0, 400.0, 10.0)
    exact = growth.model_arrival_map(shape, centres, births, G_PX_PER_S)
    result = pipeline.analyze_arrival(arrival_from_truth(exact, times)).result
    late = min(result.spherulites, key=lambda s: np.hypot(s.x_px - 100, s.y_px - 80))
    assert late.status == "few-points" and late.n_points == 4
    assert np.hypot(late.x_px - 100, late.y_px - 80) < 1.5
    assert abs(late.nucleation_time_s - late_birth) < 10.0  # within one frame interval
    assert late.growth_rate_um_per_min is None  # held at the field's, not measured
    area_mm2 = shape[0] * shape[1] * (UM_PER_PX * 1e-3) ** 2
    assert result.nucleation.density_per_mm2 == pytest.approx(7 / area_mm2)
    # An edit elsewhere leaves it as it was (the field's G, from the ok fits, moves a hair).
    other = max(result.spherulites, key=lambda s: np.hypot(s.x_px - 100, s.y_px - 80))
    analysis = pipeline.analyze_arrival(arrival_from_truth(exact, times))
    edited = pipeline.apply_edits(analysis, [e.ExcludeSpherulite(other.x_px, other.y_px)]).result
    again = next(s for s in edited.spherulites if s.id == late.id)
    assert again.status == "few-points" and again.nucleation_time_s == pytest.approx(late.nucleation_time_s, abs=0.1)
    assert (again.x_px, again.y_px) == pytest.approx((late.x_px, late.y_px), abs=0.05)


def test_isothermal_start_shifts_result_times():
    times = np.arange(0.0, 300.0, 3.0)
    exact = growth.model_arrival_map((120, 120), [[60.0, 60.0]], [30.0], G_PX_PER_S)
    result = pipeline.analyze_arrival(arrival_from_truth(exact, times), isothermal_start_s=20.0).result
    assert result.spherulites[0].nucleation_time_s == pytest.approx(10.0, abs=3.0)
    assert result.area_fraction_time_s[0] == -20.0


def test_square_root_growth_is_nonlinear():
    # from memory: r = a sqrt(t - t0), diffusion-limited growth (Christian 2002, The Theory of
    # Transformations in Metals and Alloys, Pergamon), i.e. t = t0 + (r / a)^2.
    times = np.arange(0.0, 400.0, 4.0)
    yy, xx = np.mgrid[:160, :160]
    exact = 2.0 + (np.hypot(xx - 80.0, yy - 80.0) / 4.0) ** 2
    result = pipeline.analyze_arrival(arrival_from_truth(exact, times)).result
    assert [s.status for s in result.spherulites] == ["nonlinear"]


# ---------------------------------------------------------------- edits
def _nearest(result, x, y):
    return min(result.spherulites, key=lambda s: (s.x_px - x) ** 2 + (s.y_px - y) ** 2)


def test_delete_leaves_territory_unassigned_and_unapplied_edits_are_reported(field_analysis):
    analysis = field_analysis[0]
    target = next(s for s in analysis.result.spherulites if s.status == "ok")
    far = e.DeleteDetection(x_px=-500.0, y_px=-500.0)
    edited = pipeline.apply_edits(analysis, [e.DeleteDetection(target.x_px + 2, target.y_px), far])
    ids = [s.id for s in edited.result.spherulites]
    assert target.id not in ids and len(ids) == len(analysis.result.spherulites) - 1
    assert edited.result.unapplied_edits == (far,)
    assert not np.any(edited.result.extra["territories"] == target.id)
    others = {s.id: s for s in analysis.result.spherulites}
    assert all(s.id in others for s in edited.result.spherulites)


def test_delete_then_add_restores_a_spherulite_as_manual(field_analysis):
    analysis = field_analysis[0]
    target = next(s for s in analysis.result.spherulites if s.status == "ok")
    edited = pipeline.apply_edits(analysis, [e.DeleteDetection(target.x_px, target.y_px),
                                             e.AddNucleus(target.x_px, target.y_px)])
    back = _nearest(edited.result, target.x_px, target.y_px)
    assert back.source == "manual" and back.id != target.id
    assert back.growth_rate_um_per_min == pytest.approx(target.growth_rate_um_per_min, rel=0.01)
    assert abs(back.x_px - target.x_px) < 0.5


def test_exclude_include_move_merge_and_ignore(field_analysis):
    analysis = field_analysis[0]
    ok = [s for s in analysis.result.spherulites if s.status == "ok"]
    a, b = ok[0], ok[1]
    edited = pipeline.apply_edits(analysis, [
        e.ExcludeSpherulite(a.x_px, a.y_px),
        e.MoveCentre(b.x_px, b.y_px, b.x_px + 3.0, b.y_px),
        e.IgnoreFrames(0, 5, b.x_px + 3.0, b.y_px)])
    res = edited.result
    assert res.spherulite(a.id).status == "excluded"
    assert res.growth_rate.n <= analysis.result.growth_rate.n - 1
    moved = res.spherulite(b.id)
    assert moved.x_px == b.x_px + 3.0
    assert moved.growth_rate_um_per_min == pytest.approx(b.growth_rate_um_per_min, rel=0.15)
    series = next(r for r in res.radii if r.id == b.id)
    assert not np.any(series.used[series.time_s <= 5 * 6.0])
    back = pipeline.apply_edits(edited, list(edited.edits) + [e.IncludeSpherulite(a.x_px, a.y_px)])
    assert back.result.spherulite(a.id).status == "ok"
    merged = pipeline.apply_edits(analysis, [e.MergeDetections(a.x_px, a.y_px, b.x_px, b.y_px)])
    assert b.id not in [s.id for s in merged.result.spherulites]
    assert np.sum(merged.result.extra["territories"] == a.id) > np.sum(
        analysis.result.extra["territories"] == a.id)


def test_whole_experiment_ignore_drops_area_fraction_samples(field_analysis):
    analysis = field_analysis[0]
    edited = pipeline.apply_edits(analysis, [e.IgnoreFrames(10, 19), e.IgnoreFrames(500, 600)])
    assert edited.result.area_fraction.size == analysis.result.area_fraction.size - 10
    assert len(edited.result.unapplied_edits) == 1


def test_apply_edits_equals_a_fresh_analysis_with_the_same_edits(field_analysis):
    analysis, centres, births = field_analysis
    s = analysis.result.spherulites[3]
    edit_list = (e.DeleteDetection(s.x_px, s.y_px), e.AddNucleus(130.0, 110.0),
                 e.ExcludeSpherulite(*[analysis.result.spherulites[5].x_px, analysis.result.spherulites[5].y_px]))
    fresh = pipeline.analyze_arrival(analysis.arrival, edits=edit_list, temperature_c=131.5,
                                     thickness_um=25.0).result
    replayed = pipeline.apply_edits(analysis, edit_list).result
    key = [(s.id, s.status, s.source, round(s.x_px, 6), s.growth_rate_um_per_min) for s in fresh.spherulites]
    assert key == [(s.id, s.status, s.source, round(s.x_px, 6), s.growth_rate_um_per_min)
                   for s in replayed.spherulites]
    assert fresh.nucleation == replayed.nucleation and fresh.growth_rate == replayed.growth_rate


# ---------------------------------------------------------------- settings and input
def test_settings_round_trip_and_bad_values():
    settings = pipeline.AnalysisSettings(sensitivity_frames=0.7, arrival={"channel": "auto"})
    assert pipeline.AnalysisSettings.from_dict(settings.to_dict()) == settings
    with pytest.raises(InputError, match="unknown is not a known setting"):
        pipeline.AnalysisSettings.from_dict({"unknown": 1})
    with pytest.raises(InputError, match="sensitivity_frames"):
        pipeline.AnalysisSettings.from_dict({"sensitivity_frames": -1}, path="exp.json")


def test_bad_calibration_is_an_input_error():
    times = np.arange(0.0, 10.0, 1.0)
    arrival = arrival_from_truth(growth.model_arrival_map((20, 20), [[10, 10]], [0], 1.0), times)
    arrival.um_per_px = 0.0
    with pytest.raises(InputError, match="pixel size"):
        pipeline.analyze_arrival(arrival, stack="run7.tif")


def test_empty_and_fully_crystalline_fields_give_results_with_warnings():
    times = np.arange(0.0, 100.0, 5.0)
    melt = arrival_from_truth(np.full((40, 40), np.inf), times)
    result = pipeline.analyze_arrival(melt).result
    assert result.spherulites == () and result.nucleation.count == 0
    assert result.growth_rate.value is None and result.warnings == ("no spherulite found in the arrival map",)
    solid = arrival_from_truth(np.full((40, 40), -5.0), times)
    warnings = pipeline.analyze_arrival(solid).result.warnings
    assert any("crystalline in the first frame" in w for w in warnings)
