"""Nuclei as regional minima of the arrival map and territories as its watershed basins."""

import numpy as np

from analysis.spherulites import growth, nuclei


def _quantised(arrival, times):
    """What a frame-by-frame pass records: the first frame time at or after the arrival."""
    idx = np.searchsorted(times, arrival)
    return np.where(idx < times.size, times[np.minimum(idx, times.size - 1)], np.inf).astype(np.float32)


def _detect(arrival, times, **kw):
    work = nuclei.working_map(arrival, times)
    return nuclei.find_markers(work, arrival, times, **kw), work


def test_minima_of_a_johnson_mehl_map_are_the_nuclei():
    # Johnson & Mehl 1939 (Trans. AIME 135, 416): each nucleus is the unique minimum of
    # the arrival time in its cell.
    rng = np.random.default_rng(3)
    centres = np.array([[40.0, 40.0], [120.0, 50.0], [80.0, 130.0], [150.0, 140.0]])
    times = np.arange(0.0, 200.0, 2.0)
    exact = growth.model_arrival_map((170, 190), centres, [0.0, 3.0, 6.0, 1.0], 0.6)
    noisy = _quantised(exact + rng.normal(0, 0.6, exact.shape), times)
    markers, _ = _detect(noisy, times)
    assert markers.xy_px.shape[0] == 4
    for cx, cy in centres:
        assert np.min(np.hypot(*(markers.xy_px - [cx, cy]).T)) < 1.5


def test_late_nucleus_in_a_melt_pocket_and_close_pair_are_found():
    times = np.arange(0.0, 150.0, 1.0)
    # A pair 12 px apart born together, and a late nucleus (t0 = 60 s) far from both.
    centres = np.array([[50.0, 60.0], [62.0, 60.0], [150.0, 60.0]])
    exact = growth.model_arrival_map((120, 200), centres, [0.0, 0.0, 60.0], 1.0)
    markers, _ = _detect(_quantised(exact, times), times)
    assert markers.xy_px.shape[0] == 3
    late = np.argmin(np.hypot(*(markers.xy_px - [150.0, 60.0]).T))
    assert markers.min_time_s[late] > 55.0


def test_noise_pits_do_not_become_nuclei():
    rng = np.random.default_rng(0)
    times = np.arange(0.0, 300.0, 2.0)
    exact = growth.model_arrival_map((150, 150), [[75.0, 75.0]], [0.0], 0.5)
    noisy = _quantised(exact + rng.normal(0, 1.0, exact.shape), times)
    markers, _ = _detect(noisy, times)
    assert markers.xy_px.shape[0] == 1


def test_unusable_pixels_are_filled_and_melt_is_never_a_territory():
    times = np.arange(0.0, 40.0, 1.0)
    exact = growth.model_arrival_map((80, 80), [[40.0, 40.0]], [0.0], 1.0)
    arrival = _quantised(exact, times)
    arrival[38:43, 10:30] = np.nan  # a dust streak
    work = nuclei.working_map(arrival, times)
    assert np.all(np.isfinite(work))
    markers = nuclei.find_markers(work, arrival, times)
    labels = nuclei.territories(work, arrival, markers.labels)
    assert markers.xy_px.shape[0] == 1
    assert np.all(labels[np.isposinf(arrival)] == 0)
    assert np.all(labels[np.isfinite(arrival)] == 1)


def test_minimum_on_the_border_is_flagged():
    times = np.arange(0.0, 100.0, 1.0)
    exact = growth.model_arrival_map((80, 120), [[-10.0, 40.0], [80.0, 40.0]], [0.0, 0.0], 1.0)
    markers, _ = _detect(_quantised(exact, times), times)
    left = np.argmin(markers.xy_px[:, 0])
    assert markers.on_border[left] and not markers.on_border[1 - left]


def test_snap_to_minimum_finds_the_cone_apex_near_a_click():
    exact = growth.model_arrival_map((60, 60), [[30.0, 25.0]], [0.0], 1.0).astype(np.float32)
    assert nuclei.snap_to_minimum(exact, 32.0, 27.0, 3.0) == (25, 30)


def test_two_cones_in_one_territory_are_split_near_their_apexes():
    # Two simultaneous nuclei 9 px apart seen as one blob: the Johnson-Mehl map of the
    # pair (Johnson & Mehl 1939, Trans. AIME 135, 416) is fitted far better by two cones.
    times = np.arange(0.0, 200.0, 2.0)
    apexes = np.array([[40.0, 40.0], [49.0, 44.0]])
    exact = growth.model_arrival_map((90, 90), apexes, [0.0, 0.0], 0.5)
    yy, xx = np.nonzero(exact > 20.0)  # as if the first 20 s were already crystalline
    t = exact[yy, xx]
    frames = np.searchsorted(times, t)
    single = growth.fit_cone(xx, yy, t, frames, start_xy=(44.0, 42.0), f_scale_s=1.0)
    found = nuclei.split_candidates(xx, yy, t, single, slope_s_per_px=2.0, f_scale_s=1.0)
    assert found is not None
    got = np.array(sorted(found))
    assert np.allclose(got, apexes, atol=0.5)


def test_single_cone_is_not_split():
    exact = growth.model_arrival_map((90, 90), [[45.0, 45.0]], [0.0], 0.5)
    yy, xx = np.nonzero(exact > 4.0)
    t = exact[yy, xx] + np.random.default_rng(2).normal(0, 0.5, yy.size)
    frames = (t // 2).astype(int)
    fit = growth.fit_cone(xx, yy, t, frames, start_xy=(45.0, 45.0), f_scale_s=1.0)
    assert nuclei.split_candidates(xx, yy, t, fit, slope_s_per_px=2.0, f_scale_s=1.0) is None


def test_nucleus_missing_from_the_fits_is_found_from_their_deficit():
    # A nucleus born shortly before a neighbour's front reaches it may have too shallow a
    # minimum to be detected, but its pixels crystallise earlier than the neighbour's
    # fitted cone predicts (Johnson-Mehl cells: Johnson & Mehl 1939, Trans. AIME 135, 416).
    times = np.arange(0.0, 300.0, 2.0)
    neighbour = growth.model_arrival_map((100, 160), [[20.0, 50.0]], [0.0], 1.0)
    late = growth.model_arrival_map((100, 160), [[80.0, 50.0]], [50.0], 1.0)  # front arrives at 60 s
    arrival = np.minimum(neighbour, late)
    frames = np.searchsorted(times, arrival)
    seeds = nuclei.missed_nuclei(arrival, np.ones(arrival.shape, bool), neighbour, frames=frames,
                                 interval_s=2.0, slope_s_per_px=1.0, existing_xy=[(20.0, 50.0)])
    assert len(seeds) == 1
    row, col = seeds[0]
    assert abs(col - 80) <= 3 and abs(row - 50) <= 3


def test_estimated_arrivals_inside_first_frame_crystals_give_their_minima():
    # Two nuclei 6 px apart, each disc already 16 px in radius at the first frame, and
    # their later growth hidden (unusable): the crystal present at the start is one blob
    # whose neck hardly shows. Given the arrivals estimated inside it (here the
    # Johnson-Mehl cones themselves; Johnson & Mehl 1939, Trans. AIME 135, 416), each
    # nucleus is a minimum of the working map.
    times = np.arange(0.0, 120.0, 2.0)
    centres = np.array([[60.0, 50.0], [66.0, 50.0]])
    exact = growth.model_arrival_map((100, 130), centres, [-32.0, -32.0], 0.5)
    at_start = exact <= times[0]
    arrival = np.where(at_start, np.float32(times[0]), np.float32(np.nan))
    estimate = np.where(at_start, exact, np.nan).astype(np.float32)
    work = nuclei.working_map(arrival, times, at_start=at_start, below_start_s=estimate)
    markers = nuclei.find_markers(work, arrival, times, depth_frames=0.5)
    assert markers.xy_px.shape[0] == 2
    for cx, cy in centres:
        assert np.min(np.hypot(*(markers.xy_px - [cx, cy]).T)) < 1.5


def test_three_nuclei_merged_in_the_first_frame_are_all_found():
    # Three simultaneous nuclei about 21 px apart, each disc 12 px in radius when the
    # record starts: one crystal in the first frame, its outline three arcs. The arrival
    # map is the Johnson-Mehl tessellation of three cones (Johnson & Mehl 1939, Trans.
    # AIME 135, 416); three cones explain the measured fronts and the outline, one cone
    # cannot.
    times = np.arange(0.0, 200.0, 2.0)
    centres = np.array([[50.0, 40.0], [71.0, 44.0], [58.0, 60.0]])
    exact = growth.model_arrival_map((100, 110), centres, [-24.0] * 3, 0.5)
    at_start = exact <= times[0]
    yy, xx = np.nonzero(~at_start & (exact < 60.0))
    t = exact[yy, xx]
    frames = np.searchsorted(times, t)
    single = growth.fit_cone(xx, yy, t, frames, start_xy=(60.0, 48.0), f_scale_s=1.0)
    sy, sx = np.nonzero(at_start)
    cones = nuclei.cluster_cones(xx, yy, t, single, slope_s_per_px=2.0, f_scale_s=1.0,
                                 start_region=(sx, sy), start_time_s=float(times[0]))
    assert cones is not None
    found = cones[:-1].reshape(-1, 3)
    assert found.shape[0] == 3
    for cx, cy in centres:
        assert np.min(np.hypot(found[:, 0] - cx, found[:, 1] - cy)) < 1.0
    assert np.allclose(found[:, 2], -24.0, atol=1.0)


def test_one_crystal_in_the_first_frame_stays_one_nucleus():
    # A single disc present at the start, its later growth measured with timing noise:
    # more cones buy no gain, so no cluster is reported.
    times = np.arange(0.0, 200.0, 2.0)
    exact = growth.model_arrival_map((100, 100), [[50.0, 50.0]], [-24.0], 0.5)
    at_start = exact <= times[0]
    yy, xx = np.nonzero(~at_start & (exact < 60.0))
    t = exact[yy, xx] + np.random.default_rng(3).normal(0, 0.5, yy.size)
    frames = np.searchsorted(times, t)
    single = growth.fit_cone(xx, yy, t, frames, start_xy=(50.0, 50.0), f_scale_s=1.0)
    sy, sx = np.nonzero(at_start)
    assert nuclei.cluster_cones(xx, yy, t, single, slope_s_per_px=2.0, f_scale_s=1.0,
                                start_region=(sx, sy), start_time_s=float(times[0])) is None


def _frame_timed_pair(apexes, *, slope=12.0, noise_s=3.0, seed=0):
    """Pixels of a Johnson-Mehl map of nuclei born together (Johnson & Mehl 1939, Trans.
    AIME 135, 416), timed with Gaussian noise, between 30 s and 300 s."""
    exact = growth.model_arrival_map((90, 90), apexes, [0.0] * len(apexes), 1.0 / slope)
    yy, xx = np.nonzero((exact > 30.0) & (exact < 300.0))
    t = exact[yy, xx] + np.random.default_rng(seed).normal(0.0, noise_s, yy.size)
    centre = np.mean(apexes, axis=0)
    fit = growth.fit_cone(xx, yy, t, (t // 10).astype(int), start_xy=tuple(centre), f_scale_s=5.0)
    return xx, yy, t, fit


def _compared_split(xx, yy, t, fit, noise_s=3.0, correlation_px=1.0):
    evidence, _, axis = nuclei.elongation(fit, xx, yy, t, noise_s=noise_s, correlation_px=correlation_px)
    return evidence, nuclei.split_cones(xx, yy, t, fit, slope_s_per_px=12.0, f_scale_s=5.0, noise_s=noise_s,
                                        correlation_px=correlation_px, axis_start=axis)


def test_two_nuclei_six_px_apart_are_two_cones_on_the_model_comparison():
    # Two simultaneous nuclei make the front elongated (Johnson & Mehl 1939); the
    # Schwarz criterion (Schwarz 1978, Ann. Stat. 6, 461) must prefer two cones, and
    # their apexes must land on the nuclei.
    apexes = np.array([[42.0, 44.0], [48.0, 46.0]])
    xx, yy, t, fit = _frame_timed_pair(apexes)
    evidence, cones = _compared_split(xx, yy, t, fit)
    assert evidence > 0 and cones is not None
    got = np.asarray(cones[:-1]).reshape(2, 3)[:, :2]
    got = got[np.argsort(got[:, 0])]
    assert np.allclose(got, apexes, atol=0.5)
    assert abs(cones[-1] / 12.0 - 1) < 0.02


def test_a_pair_two_px_apart_is_resolved_but_one_cone_stays_one():
    # 2 px apart, the midpoint cone is off by s d / 2 = 12 s along the axis: four
    # times the timing noise, so the comparison resolves it; a single cone, timed
    # with the same noise, gains nothing from a second apex (Schwarz 1978).
    apexes = np.array([[44.0, 45.0], [46.0, 45.0]])
    evidence, cones = _compared_split(*_frame_timed_pair(apexes, seed=1))
    assert cones is not None
    got = np.sort(np.asarray(cones[:-1]).reshape(2, 3)[:, 0])
    assert np.allclose(got, apexes[:, 0], atol=0.6)
    for seed in range(3):
        evidence, cones = _compared_split(*_frame_timed_pair(np.array([[45.0, 45.0]]), seed=seed))
        assert evidence <= 0 and cones is None


def test_correlated_timing_errors_count_as_fewer_samples():
    # The mean of white noise smoothed by a Gaussian of sigma s varies as if the area
    # held area / (4 pi s^2) independent values: the integral of the smoothed field's
    # autocorrelation (Vanmarcke 1983, Random Fields, MIT Press, ch. 5)  # from memory
    import cv2

    sigma, size, trials = 2.0, 64, 400
    rng = np.random.default_rng(3)
    means, single = [], []
    for _ in range(trials):
        field = cv2.GaussianBlur(rng.normal(0.0, 1.0, (size + 32, size + 32)).astype(np.float32), (0, 0), sigma)
        inner = field[16:-16, 16:-16]
        means.append(inner.mean())
        single.append(inner.var())
    n_eff = np.mean(single) / np.var(means)
    assert abs(nuclei.independent_samples(size * size, sigma) / n_eff - 1) < 0.2
    assert nuclei.independent_samples(10, 0.0) == 10  # unsmoothed: one sample per pixel
