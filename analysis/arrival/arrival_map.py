"""The arrival-time map: when each pixel of the specimen first became crystalline.

Isothermal crystallization is irreversible, so one streaming pass over the frames can
record, per pixel, the time the growing front reached it. Memory stays O(H·W) whatever
the number of frames: a few maps plus a short evidence history for the pixels that the
front is crossing right now.

Per frame (see :func:`arrival_map_iter`):

1. crystalline evidence against the melt, in camera coordinates (:mod:`analysis.arrival.evidence`:
   flicker gain, per-channel noise units, dust and illumination cancelled);
2. drift of the specimen, estimated on that evidence every few frames (only where
   crystal has settled, so growing fronts are not read as motion; :mod:`analysis.arrival.registration`)
   and undone by resampling the evidence onto frame 0's grid, fused with its smoothing;
3. detection (:mod:`analysis.arrival.tracking`): a melt pixel whose evidence reaches the
   threshold starts being *tracked*; it must stay above ``hysteresis × threshold`` for
   ``persistence_frames`` frames (flicker and noise spikes do not), otherwise it goes
   back to melt;
4. timing: a tracked pixel keeps the evidence of the frame before detection and of the
   next ``track_frames`` frames. Its arrival is where the evidence crossed *half of its
   own plateau* (linear interpolation between the two frames around the crossing). A
   soft front reaches half its contrast when it is centred on the pixel, whatever that
   pixel's contrast (bright quadrant, near-extinction fringe, dark band), so the time
   does not depend on the detection threshold. Then the pixel is crystalline for good.

After the pass, pixels that never gave evidence but are enclosed by growth (extinction
wedges, dark bands, dust over crystal) receive the earliest arrival consistent with the
measured growth speed (:func:`analysis.arrival.evidence.complete_wedges`), flagged in ``filled``.
The growth-analysis stage may exclude ``filled`` pixels from cone fits (they are
consistent with, but not independent of, their neighbours) and use them for territories
and transformed fractions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Generator

import cv2
import numpy as np

from analysis.arrival import evidence as segment
from analysis.arrival import quality
from analysis.arrival.registration import (
    AUTO_WARP_TOLERANCE_PX,
    DriftTracker,
    WindowedImage,
    extrapolate_unseen_drift,
    warp_onto_reference,
)
from analysis.arrival.tracking import DONE, MELT, PassState, retire_all, step_frame
from analysis import heuristics
from analysis.errors import InputError
from analysis.progress import Progress, run_to_completion
from analysis.results import ImageQuality
from analysis.settings import ArrivalSettings  # described once, with ranges and help

__all__ = ["ArrivalSettings", "ArrivalMap", "arrival_map_iter", "arrival_map"]

_STAGE = "arrival times"
_NEVER, _UNUSABLE = -1, -2


@dataclass(frozen=True)
class ArrivalMap:
    """Per-pixel arrival times on frame 0's pixel grid.

    Attributes
    ----------
    arrival_s : ndarray, float32, (H, W)
        Time (s, recording clock) the pixel first became crystalline; +inf never within
        the record; NaN unusable.
    frame_index : ndarray, int32, (H, W)
        First frame in which the pixel is crystalline; -1 never; -2 unusable.
    crystalline_at_start : ndarray of bool, (H, W)
        Already crystalline in frame 0 (arrival_s = times_s[0], an upper bound).
    shifts_px : ndarray, float64, (n_frames, 2)
        (dy, dx) specimen drift of each frame relative to frame 0, px.
    times_s : ndarray, float64, (n_frames,)
        Frame times used, s.
    um_per_px : float
    unusable : ndarray of bool, (H, W)
        Pixels hidden by dense dust (NaN in ``arrival_s``).
    filled : ndarray of bool, (H, W)
        Arrival inferred from the growth geometry (extinction wedges, dark bands, faint
        pixels seen only late), not measured.
    contrast : ndarray, float32, (H, W)
        Plateau evidence after the front passed, in noise units (0 where not measured).
    evidence_threshold : float
        Detection threshold used, noise units.
    slowness_s_per_px : float
        Typical |∇t| used to fill wedges (1/G in s/px); NaN when not measured.
    channel : str
        Channel mode used (``"grey"`` or ``"colour"``).
    before_start_s : ndarray, float32, (H, W)
        For pixels crystalline at start only (NaN elsewhere): their arrival extrapolated
        back from the growth measured around them, ``max_q t(q) − |p − q|/G`` (exact on
        a cone when p lies between its nucleus and a measured pixel). An estimate, not
        an observation: it lets nuclei and cones be found inside crystals that were
        already there when the recording began.
    """

    arrival_s: np.ndarray
    frame_index: np.ndarray
    crystalline_at_start: np.ndarray
    shifts_px: np.ndarray
    times_s: np.ndarray
    um_per_px: float
    unusable: np.ndarray
    filled: np.ndarray
    contrast: np.ndarray
    evidence_threshold: float
    slowness_s_per_px: float
    channel: str
    before_start_s: np.ndarray
    image_quality: ImageQuality | None = None  # when measured

    @property
    def crystalline_fraction(self) -> np.ndarray:
        """Crystalline fraction of the usable field at each frame time."""
        usable = self.arrival_s[~self.unusable]
        ordered = np.sort(usable.ravel())
        return np.searchsorted(ordered, self.times_s, side="right") / max(ordered.size, 1)


def _checked_stack(stack, start_frame: int = 0) -> tuple[np.ndarray, float]:
    path = getattr(stack, "path", None)
    if len(stack) - start_frame < 2:
        raise InputError(f"needs at least two frames from frame {start_frame} on to measure arrival times", path)
    if stack.times_s is None:
        raise InputError("frame times are unknown (give the frame interval)", path)
    times = np.asarray(stack.times_s, np.float64)
    if times.shape != (len(stack),) or not np.all(np.isfinite(times)) or np.any(np.diff(times) <= 0):
        raise InputError("frame times must be finite and strictly increasing, one per frame", path)
    um = stack.um_per_px
    if um is None or not (math.isfinite(um) and um > 0):
        raise InputError("pixel size (um per px) is unknown or not positive", path)
    shape = tuple(stack.frame_shape)
    if len(shape) < 2 or shape[0] < 48 or shape[1] < 48:
        raise InputError(f"frames of shape {shape} are too small to analyse (48×48 px at least)", path)
    return times[start_frame:], float(um)



def arrival_map_iter(stack, *, settings: ArrivalSettings = ArrivalSettings()
                     ) -> Generator[Progress, None, ArrivalMap]:
    """One streaming pass over ``stack``; yields :class:`Progress`, returns :class:`ArrivalMap`.

    Parameters
    ----------
    stack : FrameStack-like
        ``len``, ``times_s`` (s), ``um_per_px``, ``frame_shape``, ``iter_frames()``, ``path``.
    settings : ArrivalSettings

    Raises
    ------
    InputError
        Missing calibration or times, too few or too small frames, a frame of the wrong
        shape or containing NaN.
    """
    times, um_per_px = _checked_stack(stack, settings.start_frame)
    n = times.size
    frames = stack.iter_frames(settings.start_frame)
    raw0 = _checked_frame(next(frames), stack, settings.start_frame)
    raw1 = _checked_frame(next(frames), stack, settings.start_frame + 1)
    mode = segment.resolve_channel_mode(settings.channel, raw0)
    first, second = segment.working_image(raw0, mode), segment.working_image(raw1, mode)
    last = _last_frames(stack, settings.start_frame, mode)
    model, threshold, at_start, probe = _set_up(first, second, last, settings, mode,
                                                integer_data=raw0.dtype.kind in "ui", full_scale=_full_scale(raw0))
    state = PassState(first.shape[:2], n, settings)
    state.gate[:] = threshold
    state.threshold = threshold
    state.gate[at_start.ravel()] = np.inf
    state.status[at_start.ravel()] = DONE
    state.arrival[at_start.ravel()] = times[0]
    drift = None if settings.registration == "off" else DriftTracker(coarse_sigma_px=None, crop_px=192)
    if drift is not None:
        drift.update(np.zeros(first.shape[:2], np.float32), np.zeros(first.shape[:2], bool))
    step = segment.sample_step(first.shape)
    usable_sample = ~(model.blind | at_start)[::step, ::step]
    reference_sum = first.astype(np.float64)
    reference_count = np.ones(first.shape[:2], np.float64)
    yield Progress(_STAGE, 1.0 / n, f"frame 1 of {n}")
    for k in range(1, n):
        image = second if k == 1 else segment.working_image(_checked_frame(next(frames), stack, settings.start_frame + k), mode,
                                                            keep_integers=True)
        sample = _melt_sample(state, step, threshold) & usable_sample
        gain = segment.frame_gain(image, model, sample)
        diff = segment.melt_difference(image, model, gain)
        if k < settings.reference_frames:
            still_melt = segment.evidence_from_difference(diff, model) < 0.5 * threshold
            _update_reference(model, reference_sum, reference_count, image, gain, still_melt)
        elif reference_sum is not None:
            reference_sum = reference_count = None  # done: free the accumulators
        state.shifts[k] = _frame_shift(state, drift, diff, model, at_start, k)
        specimen = segment.evidence_from_difference(diff, model, _applied_shift(state.shifts[k], settings.registration))
        step_frame(state, specimen.ravel(), k, times, threshold)
        probe.keep_front(state, specimen, k)
        yield Progress(_STAGE, (k + 1) / n, f"frame {k + 1} of {n}")
    retire_all(state, times, threshold)
    if drift is not None:
        _regrid_unseen_drift(state, at_start, times[0])
    return _finish(state, times, um_per_px, threshold, at_start, model, mode, probe)


def arrival_map(stack, *, settings: ArrivalSettings = ArrivalSettings(), on_progress=None) -> ArrivalMap:
    """Eager wrapper of :func:`arrival_map_iter`."""
    return run_to_completion(arrival_map_iter(stack, settings=settings), on_progress)


def _checked_frame(frame, stack, index) -> np.ndarray:
    frame = np.asarray(frame)
    path = getattr(stack, "path", None)
    if frame.shape != tuple(stack.frame_shape):
        raise InputError(f"frame {index} has shape {frame.shape}, expected {tuple(stack.frame_shape)}", path)
    if frame.dtype.kind == "f" and not np.all(np.isfinite(frame)):
        raise InputError(f"frame {index} contains NaN or infinite values", path)
    return frame


def _last_frames(stack, start_frame, mode):
    """The last two frames (working images) when the stack can be read out of order, else None."""
    if not hasattr(stack, "__getitem__") or len(stack) - start_frame < 4:
        return None
    return tuple(segment.working_image(_checked_frame(stack[len(stack) - k], stack, len(stack) - k), mode)
                 for k in (2, 1))


class _QualityProbe:
    """What the image-quality block needs from the pass: the contrast measured before it,
    and the evidence of one frame whose front crosses the field (for the edge blur)."""

    def __init__(self, contrast, crystal_noise, full_scale):
        self.contrast, self.crystal_noise, self.full_scale = contrast, crystal_noise, full_scale
        self.front_frame, self.front_evidence = None, None

    def keep_front(self, state, specimen, k):
        if k % 2:
            return  # every other frame is plenty, and halves the cost
        crystalline = np.count_nonzero(state.status) / state.status.size
        if 0.15 <= crystalline <= 0.6:
            self.front_frame, self.front_evidence = k, specimen.copy()


def _full_scale(frame) -> float:
    """Full scale of the data: the integer type's maximum (a 12-bit camera stored in 16 bits
    reads as a sixteenth of it), or the largest value of float data."""
    return float(np.iinfo(frame.dtype).max) if frame.dtype.kind in "ui" else max(float(np.max(frame)), 1e-12)


def _set_up(first, second, last, settings, mode, *, integer_data, full_scale):
    """Melt model (its smoothing chosen from the measured signal-to-noise ratio),
    detection threshold and frame-0 crystals from the first two frames and the last."""
    noise = segment.temporal_noise(first, second, integer_data=integer_data)
    contrast, crystal_last, crystal_noise = None, None, None
    if last is not None:
        contrast, crystal_last = quality.crystal_contrast(last[1], first, noise)
        crystal_noise = quality.crystal_noise(last[0], last[1], crystal_last, integer_data=integer_data)
    # The noise that matters is the larger: a dark melt clipped at zero shows less than the crystal.
    snr = None if contrast is None else contrast * float(np.mean(noise)) / max(
        float(np.mean(noise)), crystal_noise or 0.0)
    model = segment.MeltModel(level=first.copy(), noise=noise, blind=np.zeros(first.shape[:2], bool),
                              smoothing_px=quality.smoothing_for(snr, settings.smoothing_px))
    if contrast is not None:  # dim parts of the field get the smoothing their own contrast needs
        brightness = quality.local_brightness(last[1], first, noise, crystal_last)
        model = segment.with_local_smoothing(model, quality.smoothing_map(snr, brightness, model.smoothing_px))
    probe = _QualityProbe(contrast, crystal_noise, full_scale)
    ones = np.ones(model.channels, np.float32)
    trial = segment.evidence(second, model, ones)
    provisional = segment.evidence_threshold(trial[::2, ::2], settings.sensitivity)
    at_start = segment.initial_crystalline(first, model, provisional, min_size_px=settings.min_size_px, mode=mode)
    model.blind = segment.blind_pixels(model.level, noise, exclude=at_start)
    at_start &= ~model.blind
    trial[model.blind] = 0.0
    melt = ~(at_start | model.blind) & (trial < provisional)
    threshold = segment.evidence_threshold(trial[melt][::3], settings.sensitivity)
    return model, threshold, at_start, probe


def _update_reference(model, total, count, image, gain, still_melt):
    """Average early frames into the melt level where the pixel is still melt."""
    corrected = image * (gain if model.channels > 1 else gain[0])
    weight = still_melt if model.channels == 1 else still_melt[..., None]
    total += np.where(weight, corrected, 0.0)
    count += still_melt
    model.level = (total / (count if model.channels == 1 else count[..., None])).astype(np.float32)


def _settled_in_camera(state, at_start, k, shift):
    """Pixels the front passed a few frames ago, where they sit on the sensor, as a
    callable over a window (only the registration window is ever computed). Frame-0
    crystals are left out: the melt reference contains them, so they show no evidence
    to register on. The whole-pixel shift is plenty for a weight mask."""
    detected = state.detected.reshape(state.shape)
    dy, dx = (int(round(v)) for v in shift)
    height, width = state.shape
    settle = heuristics.current().settle_frames

    def window(rows: slice, cols: slice) -> np.ndarray:
        out = np.zeros((rows.stop - rows.start, cols.stop - cols.start), bool)
        r0, r1 = max(rows.start - dy, 0), min(rows.stop - dy, height)
        c0, c1 = max(cols.start - dx, 0), min(cols.stop - dx, width)
        if r1 > r0 and c1 > c0:
            part = (detected[r0:r1, c0:c1] <= k - settle) & ~at_start[r0:r1, c0:c1]
            out[r0 + dy - rows.start:r1 + dy - rows.start, c0 + dx - cols.start:c1 + dx - cols.start] = part
        return out

    return window


def _regrid_unseen_drift(state, at_start, start_s):
    """Move the map by the drift that happened before registration could begin
    (:func:`analysis.arrival.registration.extrapolate_unseen_drift`); frame-0 crystals stay where they are."""
    state.shifts, offset = extrapolate_unseen_drift(state.shifts, state.measured)
    if np.max(np.abs(offset)) < AUTO_WARP_TOLERANCE_PX:
        return
    arrival = state.arrival.reshape(state.shape)
    known = np.isfinite(arrival) & ~at_start
    weight = warp_onto_reference(known.astype(np.float32), offset)
    moved = warp_onto_reference(np.where(known, arrival, 0.0).astype(np.float32), offset)
    contrast = warp_onto_reference(state.contrast.reshape(state.shape), offset)
    keep = weight > 0.5
    arrival = np.where(keep, moved / np.maximum(weight, 1e-6), np.inf).astype(np.float32)
    arrival[at_start] = start_s
    state.arrival = arrival.ravel()
    state.contrast = np.where(keep, contrast / np.maximum(weight, 1e-6), 0.0).astype(np.float32).ravel()


def _melt_sample(state, step, threshold):
    """Pixels for the flicker gain, on the sampling grid: quiet in the previous frame,
    never detected, and not next to anything detected (extinction arms inside a
    spherulite look almost like melt, but not quite). Drift is slow enough to ignore."""
    quiet = state.previous.reshape(state.shape)[::step, ::step] < 0.5 * threshold
    untouched = (state.status.reshape(state.shape)[::step, ::step] == MELT).astype(np.uint8)
    return quiet & cv2.erode(untouched, np.ones((5, 5), np.uint8)).astype(bool)


def _frame_shift(state, drift, diff, model, at_start, k):
    """Drift of frame k: registered on its camera-frame evidence every few frames, and
    carried along the measured drift velocity in between."""
    if drift is None:
        return state.shifts[k - 1]
    if drift.ever_measured and k % state.settings.register_every_frames:
        return drift.coast()
    camera = WindowedImage(diff.shape[:2], lambda rows, cols: segment.evidence_from_difference(
        diff[rows, cols], model, local=False))  # only the registration window, most frames
    shift = drift.update(camera, _settled_in_camera(state, at_start, k, state.shifts[k - 1]))
    state.measured[k] = drift.measured
    return shift


def _applied_shift(shift, mode):
    """The shift used to resample a frame: none when registration is off, or (auto) while
    the drift is below the tolerance."""
    if mode == "off" or (mode == "auto" and np.max(np.abs(shift)) < AUTO_WARP_TOLERANCE_PX):
        return (0.0, 0.0)
    return shift



def _finish(state, times, um_per_px, threshold, at_start, model, mode, probe) -> ArrivalMap:
    shape = state.shape
    arrival = state.arrival.reshape(shape).astype(np.float32)
    contrast = state.contrast.reshape(shape)
    blob_px = heuristics.current().speck_area_factor * math.pi * (2.0 * model.smoothing_px) ** 2
    arrival = _drop_specks(arrival, max(state.settings.min_size_px, int(round(blob_px))))
    unusable = _unusable(model.blind, state.shifts)
    filled = np.zeros(shape, bool)
    reliable = np.isfinite(arrival) & ~at_start & (contrast >= heuristics.current().reliable_contrast_thresholds * threshold)
    slowness = segment.estimate_slowness(arrival, reliable)
    before_start = _extrapolated_before_start(arrival, reliable, at_start, slowness)
    if state.settings.fill_wedges:
        completed = segment.complete_wedges_in_time(np.where(reliable | at_start, arrival, np.inf),
                                                    reliable, slowness)
        gap = ~np.isfinite(arrival) & (completed <= times[-1])
        # Faint pixels seen late (threshold-limited timing): the geometry knows better.
        weak = np.isfinite(arrival) & ~reliable & ~at_start & (completed < arrival)
        filled = gap | weak
        arrival = np.where(filled, completed, arrival).astype(np.float32)
    arrival[unusable] = np.nan
    filled &= ~unusable
    index = np.searchsorted(times, arrival.astype(np.float64), side="left").astype(np.int32)
    index = np.where(np.isfinite(arrival), np.minimum(index, times.size - 1), _NEVER).astype(np.int32)
    index[unusable] = _UNUSABLE
    crystallised = np.isfinite(arrival) & ~at_start & ~unusable
    image_quality = _image_quality(probe, model, arrival, contrast, times, slowness, crystallised, filled,
                                   at_start)
    return ArrivalMap(
        arrival_s=arrival, frame_index=index, crystalline_at_start=at_start & ~unusable,
        shifts_px=state.shifts, times_s=times, um_per_px=um_per_px, unusable=unusable,
        filled=filled, contrast=contrast, evidence_threshold=float(threshold),
        slowness_s_per_px=slowness, channel=mode, before_start_s=before_start,
        image_quality=image_quality,
    )


def _image_quality(probe, model, arrival, plateau, times, slowness, crystallised, filled, at_start):
    """The image-quality block (analysis.arrival.quality.measure) of a finished pass."""
    blur = None
    if probe.front_evidence is not None:
        measured = np.where(filled, np.nan, arrival)
        blur = quality.edge_blur_px(probe.front_evidence.reshape(arrival.shape), plateau, measured,
                                    float(times[probe.front_frame]), slowness, _applied_smoothing(model),
                                    interval_s=float(np.median(np.diff(times))))
    noise_dn = float(np.mean(model.noise))
    level = model.level if model.level.ndim == 2 else model.level.sum(axis=2)
    # The melt shows the lamp directly (block means beat its noise even when it is dim);
    # a black melt carries no measurable illumination.
    melt = ~(model.blind | at_start)
    uneven = quality.unevenness(level, melt) if np.median(level[melt]) >= 0.25 * noise_dn * model.channels else None
    return quality.measure(noise_dn=noise_dn, crystal_noise_dn=probe.crystal_noise, full_scale=probe.full_scale,
                           contrast_noise_units=probe.contrast,
                           smoothing_px=model.smoothing_px, crystallised=crystallised, inferred=filled,
                           blur_px=blur, illumination_unevenness=uneven,
                           widest_smoothing_px=model.wide_smoothing_px or None)


def _applied_smoothing(model):
    """The evidence smoothing sigma, px: one number, or per pixel where a wider smoothing
    is blended in for the dim parts of the field (the sigma each pixel's blend matches)."""
    if model.wide_weight is None:
        return model.smoothing_px
    return (model.smoothing_px * model.wide_gain).astype(np.float32)  # noise sd ∝ 1/σ


def _extrapolated_before_start(arrival, reliable, at_start, slowness):
    """max_q t(q) − slowness·|p − q| over reliable q, for frame-0 crystals (NaN elsewhere):
    the mirror image of wedge completion, run on −t."""
    out = np.full(arrival.shape, np.nan, np.float32)
    if not at_start.any() or not np.isfinite(slowness):
        return out
    backwards = -segment.complete_wedges(np.where(reliable, -arrival, np.inf), slowness)
    out[at_start] = np.where(np.isfinite(backwards[at_start]), backwards[at_start], np.nan)
    return out


def _drop_specks(arrival, min_size_px):
    """Isolated crystalline patches smaller than ``min_size_px`` are noise."""
    found = np.isfinite(arrival).astype(np.uint8)
    _, labels, stats, _ = cv2.connectedComponentsWithStats(found, connectivity=8)
    small = stats[:, cv2.CC_STAT_AREA] < min_size_px
    small[0] = False
    return np.where(small[labels], np.float32(np.inf), arrival)


def _unusable(blind, shifts):
    """Blind camera pixels on frame 0's grid, widened by how far the specimen drifted
    (the dust swept over that much specimen)."""
    reach = int(np.ceil(np.max(np.abs(shifts)))) if shifts.size else 0
    if reach == 0 or not blind.any():
        return blind.copy()
    kernel = np.ones((2 * reach + 1, 2 * reach + 1), np.uint8)
    return cv2.dilate(blind.astype(np.uint8), kernel).astype(bool)
