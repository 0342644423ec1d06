"""Arrival-time map: accuracy against hand-made recordings with known arrival times.

The recordings are rendered analytically (no simulator needed): Johnson-Mehl growth from
a few nuclei at constant radial rate, t(p) = min_i (t_i + |p − c_i| / G) (Johnson & Mehl
1939, Trans. AIME 135, 416; the first front to arrive wins), with a soft front of about
a pixel. Optics: between crossed polarizers a spherulite with radial optic axes has
intensity ∝ sin²(2(φ − θ_pol)) around its centre, hence the four dark extinction wedges
(Hartshorne & Stuart, Crystals and the Polarising Microscope, 4th ed., 1970 # from
memory); with a first-order retardation plate the melt and the extinction arms keep the
plate's red-magenta and opposite quadrants turn blue and yellow (same source, # from memory).
"""

import math

import numpy as np
import pytest

from analysis.arrival.arrival_map import (
    ArrivalMap,
    ArrivalSettings,
    arrival_map,
    arrival_map_iter,
)
from analysis.errors import InputError
from analysis.progress import Progress
from analysis.synthetic.hot_stage import StackParams, simulate_stack

MELT_RGB = np.array([0.72, 0.28, 0.62])      # first-order red-magenta
BLUE_RGB = np.array([0.30, 0.45, 0.85])
YELLOW_RGB = np.array([0.85, 0.75, 0.30])


class ArrayStack:
    """Stand-in for analysis.stack.frames.FrameStack: frames rendered on demand, never stored."""

    def __init__(self, render, n_frames, frame_shape, times_s, um_per_px=0.5, dtype=np.uint8, path="memory.tif"):
        self._render, self._n = render, n_frames
        self.frame_shape, self.times_s, self.um_per_px = tuple(frame_shape), times_s, um_per_px
        self.dtype, self.is_rgb, self.path = np.dtype(dtype), len(frame_shape) == 3, path
        self.reads = 0

    def __len__(self):
        return self._n

    def __getitem__(self, index):
        self.reads += 1
        return self._render(index)

    def iter_frames(self, start=0, stop=None):
        for index in range(start, self._n if stop is None else stop):
            yield self[index]


class Recording:
    """A small synthetic recording and its true arrival-time map (frame 0's grid)."""

    def __init__(self, *, size=128, n_frames=40, interval_s=2.0, growth_px_per_s=0.6, nuclei=None,
                 rgb=False, noise=0.01, flicker=0.0, dust=0, vignetting=0.0, drift_px_per_frame=(0.0, 0.0),
                 bit_depth=8, start_s=0.0, front_px=1.2, seed=0):
        self.rng = np.random.default_rng(seed)
        self.size, self.n, self.rgb = size, n_frames, rgb
        self.times_s = start_s + interval_s * np.arange(n_frames)
        self.g = growth_px_per_s
        self.nuclei = np.array(nuclei if nuclei is not None else [(40, 44, 4.0), (90, 80, 14.0), (30, 100, 30.0)],
                               float)
        self.noise, self.front_px, self.bit_depth = noise, front_px, bit_depth
        self.gain = 1.0 + flicker * self.rng.standard_normal(n_frames)
        self.drift = np.array([[k * drift_px_per_frame[0], k * drift_px_per_frame[1]] for k in range(n_frames)])
        self.sensor = self._sensor(dust, vignetting)
        rows, cols = np.indices((size, size), dtype=float)
        self.truth_s, _ = self._arrival(rows, cols)

    def _arrival(self, rows, cols):
        y, x, t0 = (self.nuclei[:, i][:, None, None] for i in range(3))
        times = t0 + np.hypot(rows[None] - y, cols[None] - x) / self.g
        owner = np.argmin(times, axis=0)
        return np.min(times, axis=0), owner

    def _sensor(self, dust, vignetting):
        rows, cols = np.indices((self.size, self.size), dtype=float)
        c = (self.size - 1) / 2
        light = 1.0 - vignetting * ((rows - c) ** 2 + (cols - c) ** 2) / (2 * c * c)
        self.dust_mask = np.zeros((self.size, self.size), bool)
        for _ in range(dust):
            y, x = self.rng.integers(4, self.size - 4, 2)
            self.dust_mask |= np.hypot(rows - y, cols - x) <= 2.5
        return light * np.where(self.dust_mask, 0.15, 1.0)

    def frame(self, k):
        rows, cols = np.indices((self.size, self.size), dtype=float)
        rows, cols = rows - self.drift[k, 0], cols - self.drift[k, 1]   # specimen coordinates
        arrival, owner = self._arrival(rows, cols)
        crystal = np.clip(0.5 + (self.times_s[k] - arrival) * self.g / self.front_px, 0.0, 1.0)
        phi = np.arctan2(rows - self.nuclei[owner, 0], cols - self.nuclei[owner, 1])
        if self.rgb:
            c2 = np.cos(2 * phi)[..., None]
            solid = MELT_RGB + np.clip(c2, 0, None) * (BLUE_RGB - MELT_RGB) + np.clip(-c2, 0, None) * (YELLOW_RGB - MELT_RGB)
            image = MELT_RGB + crystal[..., None] * (solid - MELT_RGB)
            image = image * self.sensor[..., None]
        else:
            image = (0.04 + crystal * 0.8 * np.sin(2 * phi) ** 2) * self.sensor
        image = image * self.gain[k] + self.noise * self.rng.standard_normal(image.shape)
        full = 255 if self.bit_depth == 8 else 65535
        return np.clip(image * full + 0.5, 0, full).astype(np.uint8 if self.bit_depth == 8 else np.uint16)

    def stack(self):
        shape = (self.size, self.size, 3) if self.rgb else (self.size, self.size)
        dtype = np.uint8 if self.bit_depth == 8 else np.uint16
        return ArrayStack(self.frame, self.n, shape, self.times_s, dtype=dtype)

    def crystallised(self):
        """Pixels the front passed within the record (after a frame of margin)."""
        return self.truth_s <= self.times_s[-1] - (self.times_s[1] - self.times_s[0])

    def wedges(self, half_width_rad=0.2):
        rows, cols = np.indices((self.size, self.size), dtype=float)
        _, owner = self._arrival(rows, cols)
        phi = np.arctan2(rows - self.nuclei[owner, 0], cols - self.nuclei[owner, 1])
        return np.abs(np.sin(2 * phi)) < math.sin(2 * half_width_rad)


def _errors_in_frames(result: ArrivalMap, rec: Recording, where):
    interval = rec.times_s[1] - rec.times_s[0]
    return np.abs(result.arrival_s[where] - rec.truth_s[where]) / interval


def test_crossed_polarizers_arrival_times_wedges_included():
    rec = Recording()
    result = arrival_map(rec.stack())
    done = rec.crystallised() & ~result.unusable
    errors = _errors_in_frames(result, rec, done)
    assert np.median(errors) <= 0.5
    assert np.mean(errors <= 1.5) >= 0.95
    wedge_errors = _errors_in_frames(result, rec, done & rec.wedges())
    assert np.median(wedge_errors) <= 1.0
    assert result.filled[rec.wedges(0.1) & done].mean() > 0.5  # the wedges really were invisible
    assert result.channel == "grey"


def test_retardation_plate_colour_difference():
    rec = Recording(rgb=True, flicker=0.02, noise=0.01, seed=1)
    result = arrival_map(rec.stack())
    assert result.channel == "colour"
    done = rec.crystallised()
    errors = _errors_in_frames(result, rec, done)
    assert np.median(errors) <= 0.5
    never = rec.truth_s > rec.times_s[-1] + 2 * (rec.times_s[1] - rec.times_s[0])
    assert np.mean(np.isfinite(result.arrival_s[never])) < 0.01


def test_flicker_dust_and_vignetting_do_not_crystallise_the_melt():
    rec = Recording(rgb=True, flicker=0.04, dust=12, vignetting=0.3, noise=0.015, seed=2,
                    nuclei=[(40, 40, 4.0)], n_frames=30)
    result = arrival_map(rec.stack())
    never = rec.truth_s > rec.times_s[-1] + 3 * (rec.times_s[1] - rec.times_s[0])
    assert np.mean(np.isfinite(result.arrival_s[never]) & ~result.unusable[never]) < 0.002
    assert result.unusable[rec.dust_mask].mean() > 0.8      # dense dust is flagged, not guessed
    done = rec.crystallised() & ~result.unusable
    assert np.median(_errors_in_frames(result, rec, done)) <= 0.5


def test_grey_flicker_sixteen_bit():
    rec = Recording(bit_depth=16, flicker=0.05, noise=0.02, seed=3)
    result = arrival_map(rec.stack())
    done = rec.crystallised()
    assert np.median(_errors_in_frames(result, rec, done)) <= 0.5
    never = rec.truth_s > rec.times_s[-1] + 3 * (rec.times_s[1] - rec.times_s[0])
    assert np.mean(np.isfinite(result.arrival_s[never])) < 0.002


def test_drift_is_measured_and_undone():
    rec = Recording(size=192, nuclei=[(60, 66, 4.0), (135, 120, 14.0), (45, 150, 30.0)],
                    drift_px_per_frame=(0.12, -0.08), n_frames=40, seed=4)
    result = arrival_map(rec.stack(), settings=ArrivalSettings(register_every_frames=1))
    seen = np.arange(rec.n) >= 12            # once there is crystal texture to register on
    error = np.hypot(*(result.shifts_px[seen] - rec.drift[seen]).T)
    assert np.median(error) < 0.15           # three small spherulites: little to register on
    assert np.max(error) < 0.35
    done = rec.crystallised()
    assert np.median(_errors_in_frames(result, rec, done)) <= 0.5


def test_late_start_crystals_present_in_frame_zero():
    rec = Recording(nuclei=[(40, 44, -20.0), (90, 80, -10.0), (30, 100, 20.0)], seed=5)
    result = arrival_map(rec.stack())
    present = rec.truth_s <= rec.times_s[0] - 1.0
    found = result.crystalline_at_start
    overlap = np.sum(found & present) / np.sum(found | present)
    assert overlap > 0.8
    assert np.all(result.arrival_s[found] == rec.times_s[0])
    later = rec.crystallised() & (rec.truth_s > rec.times_s[0] + 3.0)
    assert np.median(_errors_in_frames(result, rec, later)) <= 0.5
    interval = rec.times_s[1] - rec.times_s[0]
    back = np.abs(result.before_start_s[found & present] - rec.truth_s[found & present]) / interval
    assert np.median(back) <= 1.0                      # extrapolated inside the old crystals
    assert np.all(np.isnan(result.before_start_s[~found]))


def test_pass_streams_every_frame_once_and_reports_progress():
    """One streaming read of every frame, plus the last two read once more beforehand to
    measure the image quality (contrast and crystal noise) that sets the smoothing."""
    rec = Recording(n_frames=12)
    stack = rec.stack()
    gen = arrival_map_iter(stack, settings=ArrivalSettings())
    reports = []
    while True:
        try:
            reports.append(next(gen))
        except StopIteration as stop:
            result = stop.value
            break
    assert stack.reads == rec.n + 2
    assert all(isinstance(r, Progress) for r in reports)
    assert reports[-1].fraction == pytest.approx(1.0)
    assert np.all(np.diff([r.fraction for r in reports]) > 0)
    assert result.arrival_s.dtype == np.float32 and result.frame_index.dtype == np.int32
    assert result.shifts_px.shape == (rec.n, 2)


def test_frame_index_matches_arrival_times():
    rec = Recording(n_frames=20)
    result = arrival_map(rec.stack())
    finite = np.isfinite(result.arrival_s)
    k = result.frame_index[finite]
    assert np.all(rec.times_s[k] >= result.arrival_s[finite] - 1e-4)
    assert np.all((k == 0) | (rec.times_s[np.maximum(k - 1, 0)] < result.arrival_s[finite]))
    assert np.all(result.frame_index[~finite & ~result.unusable] == -1)


def test_settings_round_trip_and_validation():
    settings = ArrivalSettings(sensitivity=1.5, channel="colour", registration="off")
    assert ArrivalSettings.from_dict(settings.to_dict()) == settings
    assert ArrivalSettings.from_dict({}) == ArrivalSettings()
    with pytest.raises(InputError):
        ArrivalSettings(sensitivity=0)
    with pytest.raises(InputError):
        ArrivalSettings(registration="sometimes")
    with pytest.raises(InputError):
        ArrivalSettings.from_dict({"sensitivity": 1.0, "colour_space": "lab"})
    with pytest.raises(InputError):
        ArrivalSettings.from_dict({"fill_wedges": "yes"})


def test_bad_stacks_name_the_file():
    rec = Recording(n_frames=5)
    stack = rec.stack()
    stack.times_s = None
    with pytest.raises(InputError, match="memory.tif"):
        arrival_map(stack)
    stack = rec.stack()
    stack.um_per_px = 0.0
    with pytest.raises(InputError, match="pixel size"):
        arrival_map(stack)
    stack = rec.stack()
    stack.times_s = np.array([0.0, 1.0, 1.0, 2.0, 3.0])
    with pytest.raises(InputError, match="increasing"):
        arrival_map(stack)
    stack = rec.stack()
    original = stack._render
    stack._render = lambda k: original(k) if k < 3 else original(k)[:-1]
    with pytest.raises(InputError, match="frame 3 has shape"):
        arrival_map(stack)


class SimulatedStack(ArrayStack):
    """The team simulator's recording behind the FrameStack interface."""

    def __init__(self, sim):
        first = sim.frame(0)
        super().__init__(sim.frame, len(sim), first.shape, sim.times_s, um_per_px=sim.params.um_per_px,
                         dtype=first.dtype, path="simulated.tif")


def _simulated(**changes):
    params = StackParams(height_px=256, width_px=256, n_frames=40, **changes)
    sim = simulate_stack(params)
    result = arrival_map(SimulatedStack(sim))
    truth, interval = sim.arrival_s, params.interval_s
    inside = (truth > sim.times_s[0]) & (truth <= sim.times_s[-1] - interval) & ~result.unusable
    errors = np.abs(result.arrival_s[inside] - truth[inside]) / interval
    return sim, result, errors


def test_simulated_crossed_polarizers_with_drift_and_dust():
    sim, result, errors = _simulated(drift_px_per_frame=0.1, seed=1)
    assert np.median(errors) <= 0.5 and np.percentile(errors, 90) <= 1.0
    drift_error = np.hypot(*(result.shifts_px - sim.drift_px).T)[10:]
    assert np.median(drift_error) < 0.1
    assert np.max(np.abs(result.crystalline_fraction - sim.area_fraction)) < 0.01


def test_simulated_retardation_plate_with_bands_and_drift():
    sim, result, errors = _simulated(drift_px_per_frame=0.1, retardation_plate=True, band_period_um=12.0, seed=2)
    assert result.channel == "colour"
    assert np.median(errors) <= 0.5 and np.percentile(errors, 90) <= 1.0


def test_simulated_sixteen_bit_flicker_leaves_the_melt_alone():
    sim, result, errors = _simulated(bit_depth=16, flicker=0.05, seed=3)
    assert np.median(errors) <= 0.5
    interval = sim.params.interval_s
    melt = sim.arrival_s > sim.times_s[-1] + 3 * interval
    assert np.mean(np.isfinite(result.arrival_s[melt])) < 0.002


def test_float_frames_and_grey_content_stored_as_rgb():
    rec = Recording(n_frames=15)
    as_float = ArrayStack(lambda k: rec.frame(k).astype(np.float32) / 255, rec.n, (128, 128), rec.times_s,
                          dtype=np.float32)
    as_rgb = ArrayStack(lambda k: np.dstack([rec.frame(k)] * 3), rec.n, (128, 128, 3), rec.times_s)
    for stack in (as_float, as_rgb):
        result = arrival_map(stack)
        assert result.channel == "grey"
        done = rec.crystallised()
        assert np.median(_errors_in_frames(result, rec, done)) <= 0.5


def test_a_recording_without_crystals_stays_melt():
    rng = np.random.default_rng(9)
    stack = ArrayStack(lambda k: rng.integers(5, 15, (64, 64)).astype(np.uint8), 8, (64, 64), np.arange(8.0))
    result = arrival_map(stack)
    assert not np.isfinite(result.arrival_s).any()
    assert np.isnan(result.slowness_s_per_px)


def test_start_frame_skips_early_frames():
    rec = Recording(n_frames=30)
    stack = rec.stack()
    original = stack._render
    stack._render = lambda k: np.full_like(original(k), 255) if k < 3 else original(k)  # e.g. lamp being set
    result = arrival_map(stack, settings=ArrivalSettings(start_frame=3))
    assert result.times_s.shape == (27,) and result.times_s[0] == rec.times_s[3]
    done = rec.crystallised() & (rec.truth_s > rec.times_s[3])
    assert np.median(_errors_in_frames(result, rec, done)) <= 0.5
    with pytest.raises(InputError, match="at least two frames"):
        arrival_map(stack, settings=ArrivalSettings(start_frame=29))


@pytest.fixture(scope="module")
def slowing_fronts(tmp_path_factory):
    """A film heated at 2 K/min from 128 °C: G falls twelvefold over the record (fronts from
    1.8 to 0.15 px per frame), as the Lauritzen-Hoffman growth rate falls towards the
    melting point (Lauritzen & Hoffman 1960, J. Res. NBS 64A, 73). Returns the true and
    the measured arrival maps."""
    from analysis.stack.frames import open_stack
    from analysis.synthetic.ramp import RampParams, simulate_ramp_stack, write_ramp

    params = RampParams(programme="128, 2:145", programme_start_s=-30.0, lag_s=5.0, log_start_s=-60.0,
                        ndot_ref_per_mm2_per_s=8.0)
    stack = StackParams(n_frames=40, height_px=200, width_px=200, um_per_px=0.5, interval_s=6.0,
                        n_athermal_per_mm2=600.0, dust_specks=0, scratches=0, seed=3)
    ramp = simulate_ramp_stack(params, stack)
    folder = write_ramp(ramp, tmp_path_factory.mktemp("slowing"))
    return np.asarray(ramp.sim.arrival_s, float), arrival_map(open_stack(folder / "stack.tif"))


def test_slow_fronts_are_dated_at_their_half_way_time(slowing_fronts):
    """Where a front takes longer than the tracking window to pass a pixel, its plateau is
    read once the rise is over: the pixels of the last third of the record, with fronts
    under half a pixel per frame, are dated within half a frame interval (median); they
    were dated 2-5 intervals early when half of an unfinished rise was taken."""
    true, measured = slowing_fronts
    times = measured.times_s
    seen = np.isfinite(measured.arrival_s) & ~measured.filled & (true > times[0]) & (true <= times[-1])
    late = seen & (true > times[26])
    error = measured.arrival_s[late] - true[late]
    assert late.sum() > 1000
    assert abs(np.median(error)) < 0.5 * (times[1] - times[0])


def test_wedge_filling_follows_slowing_fronts(slowing_fronts):
    """Gaps are completed at the speed the fronts had when they passed: with one speed for
    the whole record the slow fronts at the end were carried on at the early speed and
    about 14 % of the field that never crystallised was filled in as crystal (5680 px of
    40000); now under 3 %."""
    true, measured = slowing_fronts
    never = ~(true <= measured.times_s[-1])
    wrongly_filled = measured.filled & np.isfinite(measured.arrival_s) & never
    assert wrongly_filled.mean() < 0.03
