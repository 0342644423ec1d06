"""Stage drift: estimating it between frames and putting frames back on frame 0's grid.

The specimen drifts on the stage while dust, scratches and uneven illumination stay fixed
to the camera. We therefore register images in which everything fixed to the camera has
already been cancelled: the crystalline-evidence image of :mod:`analysis.arrival.evidence`
(difference against a melt reference taken in camera coordinates). What is left moves
with the specimen: spherulite interiors with their extinction crosses, bands and fibrils.

Each frame is compared with a *key frame* (a recent frame with its own cumulative shift),
not with frame 0, because frame 0 may hold no crystal at all and growth changes the
content steadily. A coarse shift from phase correlation (OpenCV) is refined by a few
Lucas-Kanade least-squares steps on the band-passed image, with pixels that changed
(moving fronts) rejected as outliers; this reaches a few hundredths of a pixel where
cv2's own sub-pixel peak estimate is only good to about 0.2 px. The key frame is renewed
when the content has grown markedly or after a fixed number of frames, so errors
accumulate only over key-frame changes.

Conventions: a shift ``(dy, dx)`` is the displacement of the specimen on the sensor in a
frame relative to frame 0 (pixels, rows then columns). :func:`warp_onto_reference`
maps such a frame back onto frame 0's grid: ``out(p) = frame(p + shift)``.

Registration modes (``ArrivalSettings.registration``):

- ``"off"``: no estimation, every shift is zero.
- ``"on"``: estimate the drift and resample every frame.
- ``"auto"`` (default): estimate it, but resample only when the cumulative shift
  exceeds :data:`AUTO_WARP_TOLERANCE_PX`, so a steady stage costs no resampling (and
  no interpolation smoothing) at all.

Drift is slow and smooth, so the arrival pass registers every few frames and
:meth:`DriftTracker.coast` carries the shift along the fitted drift velocity in between.
While no frame has enough specimen texture (a featureless melt), drift cannot be seen;
the shift is held at zero until content appears, and :func:`extrapolate_unseen_drift`
afterwards extends the measured drift back to frame 0 along a straight line.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from analysis.settings import REGISTRATION_MODES  # described once with the other settings

__all__ = [
    "REGISTRATION_MODES", "AUTO_WARP_TOLERANCE_PX", "ShiftEstimate", "DriftTracker", "WindowedImage",
    "bandpass", "estimate_shift", "warp_onto_reference", "extrapolate_unseen_drift", "drift_path",
]

AUTO_WARP_TOLERANCE_PX = 0.05
_FINE_SIGMA_PX = 1.0
_COARSE_SIGMA_PX = 6.0
_MARGIN_PX = 16
_REFINE_STEPS = 6


@dataclass(frozen=True)
class ShiftEstimate:
    """Displacement of a moving image's content relative to a reference.

    Attributes
    ----------
    dy, dx : float
        Shift in pixels (rows, columns).
    response : float
        Phase-correlation peak strength (about 0 for unrelated images, up to ~1).
    """

    dy: float
    dx: float
    response: float


def bandpass(image: np.ndarray, *, fine_sigma_px: float = _FINE_SIGMA_PX,
             coarse_sigma_px: float | None = _COARSE_SIGMA_PX) -> np.ndarray:
    """Difference of Gaussians: keeps texture, drops noise and slow illumination trends
    (``coarse_sigma_px=None``: only the noise-suppressing fine blur)."""
    image = np.asarray(image, np.float32)
    fine = cv2.GaussianBlur(image, (0, 0), fine_sigma_px)
    return fine if coarse_sigma_px is None else fine - cv2.GaussianBlur(image, (0, 0), coarse_sigma_px)


def warp_onto_reference(image: np.ndarray, shift_yx, *, border_value: float = 0.0) -> np.ndarray:
    """Resample a drifted frame onto frame 0's grid, ``out(p) = image(p + shift)``.

    Parameters
    ----------
    image : ndarray, (H, W) or (H, W, C)
    shift_yx : (float, float)
        Specimen displacement of this frame relative to frame 0, px.
    border_value : float
        Value for pixels that were outside the camera's field in this frame.
    """
    dy, dx = float(shift_yx[0]), float(shift_yx[1])
    matrix = np.float32([[1, 0, dx], [0, 1, dy]])
    height, width = image.shape[:2]
    return cv2.warpAffine(image, matrix, (width, height), flags=cv2.INTER_LINEAR | cv2.WARP_INVERSE_MAP,
                          borderMode=cv2.BORDER_CONSTANT, borderValue=border_value)


def _crop(image: np.ndarray, origin_yx, size: int, shift_yx=(0.0, 0.0)) -> np.ndarray:
    """A size×size window of ``image`` at ``origin + shift`` (sub-pixel, bicubic: bilinear
    smoothing would bias the fit towards whole-pixel shifts)."""
    y0, x0 = origin_yx
    matrix = np.float32([[1, 0, x0 + shift_yx[1]], [0, 1, y0 + shift_yx[0]]])
    return cv2.warpAffine(image, matrix, (size, size), flags=cv2.INTER_CUBIC | cv2.WARP_INVERSE_MAP,
                          borderMode=cv2.BORDER_REFLECT)


def estimate_shift(reference: np.ndarray, moving: np.ndarray, *, window: np.ndarray | None = None,
                   refine_steps: int = _REFINE_STEPS, guess_yx=None) -> ShiftEstimate:
    """Sub-pixel displacement of ``moving``'s content relative to ``reference``.

    Both images should already be band-passed and of equal square size. Phase
    correlation gives the coarse shift (and the match strength); Lucas-Kanade steps
    refine it, ignoring pixels whose residual is an outlier (content that changed rather
    than moved). When the refinement ends far from the coarse shift (OpenCV's sub-pixel
    peak can be off by half a pixel on weak texture), it is retried from ``guess_yx``
    (e.g. the previous frame's shift).
    """
    reference = np.asarray(reference, np.float32)
    moving = np.asarray(moving, np.float32)
    if window is None:
        window = cv2.createHanningWindow(reference.shape[::-1], cv2.CV_32F)
    # Copies: some OpenCV releases apply the window to the inputs in place.
    (dx, dy), response = cv2.phaseCorrelate(reference.copy(), moving.copy(), window)
    if not np.isfinite(dx + dy):
        return ShiftEstimate(0.0, 0.0, 0.0)
    fine_dy, fine_dx = _refine(reference, moving, window, (dy, dx), refine_steps)
    if np.hypot(fine_dy - dy, fine_dx - dx) > 1.0 and guess_yx is not None:
        dy, dx = float(guess_yx[0]), float(guess_yx[1])
        fine_dy, fine_dx = _refine(reference, moving, window, (dy, dx), refine_steps)
    if np.hypot(fine_dy - dy, fine_dx - dx) > 1.0:  # refinement wandered off: no real match
        return ShiftEstimate(float(dy), float(dx), 0.0)
    dy, dx = fine_dy, fine_dx
    return ShiftEstimate(float(dy), float(dx), float(response))


def _refine(reference, moving, window, shift_yx, steps):
    """Lucas-Kanade refinement of a translation plus a brightness gain (growing or
    flickering content brightens without moving), with outlier rejection (IRLS, 4·MAD)."""
    grad_y = cv2.Sobel(reference, cv2.CV_32F, 0, 1, ksize=1, scale=0.5)
    grad_x = cv2.Sobel(reference, cv2.CV_32F, 1, 0, ksize=1, scale=0.5)
    basis = np.stack([grad_y.ravel(), grad_x.ravel(), reference.ravel()])
    slope = np.hypot(grad_y, grad_x)
    textured = slope > 0.5 * np.sqrt(np.mean(slope * slope))
    size = reference.shape[0]
    shift, gain = np.array(shift_yx, float), 1.0
    for step_number in range(steps):
        residual = _crop(moving, (0, 0), size, shift) / gain - reference
        # Spread judged on textured pixels only: flat areas have tiny residuals whatever the
        # shift. No rejection on the first step, while misalignment still dominates.
        spread = 1.4826 * np.median(np.abs(residual[textured][::3])) + 1e-12
        weight = window if step_number == 0 else window * (np.abs(residual) < 4.0 * spread)
        weighted = basis * weight.ravel()
        normal = (weighted @ basis.T).astype(np.float64)
        rhs = (weighted @ residual.ravel()).astype(np.float64)
        if np.linalg.cond(normal) > 1e7:
            break
        step = np.linalg.solve(normal, rhs)
        shift -= step[:2]
        gain *= 1.0 + step[2]
        if np.max(np.abs(step[:2])) < 1e-3 and step_number > 0:
            break
    return shift


class WindowedImage:
    """A registration image computed only where it is looked at.

    ``window(rows, cols)`` returns the float32 image over two slices. The tracker reads a
    crop with a wide margin on most frames and the whole image only when it picks a new
    key frame, so a caller whose image is costly to make (a smoothed difference) saves
    computing the rest. The margin is wider than every filter the tracker applies, so the
    crop equals that part of the whole image.
    """

    def __init__(self, shape, window):
        self.shape = tuple(shape)
        self.window = window

    @classmethod
    def of(cls, image) -> "WindowedImage":
        if isinstance(image, cls):
            return image
        image = np.asarray(image, np.float32)
        return cls(image.shape, lambda rows, cols: image[rows, cols])

    def whole(self) -> np.ndarray:
        return self.window(slice(0, self.shape[0]), slice(0, self.shape[1]))


class DriftTracker:
    """Cumulative specimen drift relative to frame 0, one frame at a time.

    Feed it one registration image per frame, in order (camera coordinates, with
    everything fixed to the camera already cancelled, e.g. crystalline evidence), and
    optionally a mask of *settled* pixels: content that no longer changes except by
    drift (spherulite interiors). Growing fronts are not a translation; registering on
    them would read the growth of an off-centre spherulite as drift.

    Parameters
    ----------
    crop_px : int
        Side of the square window used for registration (clipped to the frame).
    min_response : float
        Phase-correlation strength below which a match is rejected.
    refresh_frames : int
        A key frame is renewed at the latest after this many frames, or when the
        specimen has moved ``refresh_shift_px`` away from it ...
    refresh_gain : float
        ... or as soon as its settled content (mask area, or band-passed energy when no
        mask is given) has grown by this factor. Each renewal adds the error of one
        match to all later shifts, so renewals are kept rare.
    max_step_px : float
        A frame whose shift differs from the previous frame's by more than this is
        treated as a failed match (stage drift is slow).
    min_settled_px : int
        Fewer settled pixels than this in the key frame's window: no estimate, the shift
        is held.
    fine_sigma_px : float
        High cut of the band-pass (noise fixed to the camera, e.g. in a melt reference
        that was subtracted, would otherwise pull the match towards zero shift).
    coarse_sigma_px : float or None
        Low cut of the band-pass applied before registering. ``None`` for images that
        have no slow background to remove (a difference from the melt): a high-pass would
        spread the change at a growing front into the settled interior.
    """

    def __init__(self, *, crop_px: int = 256, min_response: float = 0.2, refresh_frames: int = 80,
                 refresh_gain: float = 4.0, refresh_shift_px: float = 4.0, max_step_px: float = 3.0,
                 min_settled_px: int = 400,
                 coarse_sigma_px: float | None = _COARSE_SIGMA_PX, fine_sigma_px: float = _FINE_SIGMA_PX):
        self.coarse_sigma_px = coarse_sigma_px
        self.fine_sigma_px = fine_sigma_px
        self.crop_px = int(crop_px)
        self.min_response = float(min_response)
        self.refresh_frames = int(refresh_frames)
        self.refresh_gain = float(refresh_gain)
        self.refresh_shift_px = float(refresh_shift_px)
        self.max_step_px = float(max_step_px)
        self.min_settled_px = int(min_settled_px)
        self._key = None
        self._key_weight = None
        self._key_shift = np.zeros(2)
        self._key_content = 0.0
        self._key_age = 0
        self._origin = (0, 0)
        self._window = None
        self.shift_yx = np.zeros(2)
        self.measured = False  # whether the last update found a match (else the shift was held)
        self.ever_measured = False
        self._velocity = np.zeros(2)      # px per frame, fitted to the recent matches
        self._matches: list[tuple[int, np.ndarray]] = []
        self._frame = 0

    def update(self, image, settled=None) -> np.ndarray:
        """Register the next frame's image (an array or a :class:`WindowedImage`);
        returns its cumulative shift (dy, dx), px.

        ``settled`` is a boolean (H, W) array, or a callable ``settled(rows, cols)``
        returning the mask for a window given as two slices (so that a caller can
        compute only the part that is used), or None (every pixel).
        """
        image = WindowedImage.of(image)
        if self._key is None:
            self._start(image, settled)
            return self.shift_yx.copy()
        current = self._patch(image)
        self.measured = False
        self._frame += 1
        if self._key_content > 0 and self._usable_key():
            weight = self._window * self._key_weight
            found = estimate_shift(self._key, current, window=weight, guess_yx=self.shift_yx - self._key_shift)
            candidate = self._key_shift + (found.dy, found.dx)
            if found.response >= self.min_response and np.max(np.abs(candidate - self.shift_yx)) <= self.max_step_px:
                self.shift_yx = candidate
                self.measured = self.ever_measured = True
                self._note_match(candidate)
        self._key_age += 1
        stale = (self._key_age >= self.refresh_frames
                 or np.max(np.abs(self.shift_yx - self._key_shift)) > self.refresh_shift_px)
        grown = self._content(image, current, settled) > self.refresh_gain * self._key_content
        if stale or grown or not self._usable_key():  # an unusable key: look elsewhere next time
            self._renew(image, settled)
        return self.shift_yx.copy()

    def _note_match(self, shift):
        """Drift velocity: straight line through the matches of the last ~15 frames."""
        self._matches = [(f, s) for f, s in self._matches if self._frame - f <= 15] + [(self._frame, shift.copy())]
        if len(self._matches) >= 3:
            frames = np.array([f for f, _ in self._matches], float)
            shifts = np.array([s for _, s in self._matches])
            self._velocity = np.polyfit(frames, shifts, 1)[0]

    def coast(self) -> np.ndarray:
        """Advance one frame without registering it: the shift follows the recent drift
        velocity (stage drift is smooth), at a fraction of the cost."""
        self._frame += 1
        self._key_age += 1
        self.measured = False
        self.shift_yx = self.shift_yx + self._velocity
        return self.shift_yx.copy()

    def _usable_key(self):
        return float(np.count_nonzero(self._key_weight > 0.5)) >= self.min_settled_px

    def _content(self, image, patch, settled):
        if settled is None:
            return float(np.mean(patch * patch))
        return float(np.count_nonzero(self._crop_of(settled)))

    def _start(self, image, settled):
        size = min(self.crop_px, image.shape[0] - 2 * _MARGIN_PX, image.shape[1] - 2 * _MARGIN_PX)
        if size < 32:
            raise ValueError(f"frames of {image.shape[:2]} px are too small to register")
        self.crop_px = int(size)
        self._window = cv2.createHanningWindow((self.crop_px, self.crop_px), cv2.CV_32F)
        self._renew(image, settled)

    def _renew(self, image, settled):
        """Make this frame the key frame, choosing the window with the most texture."""
        whole = image.whole()
        self._origin = self._busiest_origin(whole if settled is None else whole * _window_of(settled, (
            slice(0, image.shape[0]), slice(0, image.shape[1]))))
        self._key = self._patch(image)
        if settled is None:
            self._key_weight = np.ones_like(self._key)
        else:  # soft edges, so that the mask border itself carries no gradient
            self._key_weight = cv2.GaussianBlur(self._crop_of(settled).astype(np.float32), (0, 0), 2.0)
        self._key_content = self._content(image, self._key, settled)
        self._key_shift = self.shift_yx.copy()
        self._key_age = 0

    def _crop_of(self, settled):
        y0, x0 = self._origin
        return _window_of(settled, (slice(y0, y0 + self.crop_px), slice(x0, x0 + self.crop_px)))

    def _patch(self, image):
        y0, x0 = self._origin
        size = self.crop_px
        region = image.window(slice(max(y0 - _MARGIN_PX, 0), y0 + size + _MARGIN_PX),
                              slice(max(x0 - _MARGIN_PX, 0), x0 + size + _MARGIN_PX))
        # A 5×5 median first: small specks fixed to the camera (dust on crystal) would
        # otherwise pull the match towards zero shift.
        passed = bandpass(cv2.medianBlur(np.ascontiguousarray(region), 5), fine_sigma_px=self.fine_sigma_px,
                          coarse_sigma_px=self.coarse_sigma_px)
        oy, ox = y0 - max(y0 - _MARGIN_PX, 0), x0 - max(x0 - _MARGIN_PX, 0)
        return np.ascontiguousarray(passed[oy:oy + size, ox:ox + size])

    def _busiest_origin(self, image):
        """Top-left corner of the crop (on a 3×3 grid of candidates) with most texture."""
        height, width = image.shape[:2]
        size = self.crop_px
        best, best_energy = (max((height - size) // 2, 0), max((width - size) // 2, 0)), -1.0
        small = cv2.resize(image, (max(width // 4, 1), max(height // 4, 1)), interpolation=cv2.INTER_AREA)
        texture = np.abs(small - cv2.GaussianBlur(small, (0, 0), 2.0))
        for y0 in np.linspace(_MARGIN_PX, height - size - _MARGIN_PX, 3).astype(int):
            for x0 in np.linspace(_MARGIN_PX, width - size - _MARGIN_PX, 3).astype(int):
                energy = float(texture[y0 // 4:(y0 + size) // 4, x0 // 4:(x0 + size) // 4].sum())
                if energy > best_energy * 1.05:
                    best, best_energy = (int(y0), int(x0)), energy
        return best


def _window_of(settled, window):
    return settled(*window) if callable(settled) else settled[window]


def extrapolate_unseen_drift(shifts_yx: np.ndarray, measured: np.ndarray, *, fit_frames: int = 40
                             ) -> tuple[np.ndarray, np.ndarray]:
    """Drift during the frames before anything could be registered, by linear extrapolation.

    Until some specimen texture exists the tracker holds the shift at zero, so every
    later shift is relative to the frame where measurement began, not to frame 0. A
    straight line fitted to the first ``fit_frames`` measured shifts is extended back to
    frame 0. Returns the corrected shifts and the constant offset that was added (zero
    when measurement started at once or too few frames were measured).
    """
    shifts_yx = np.asarray(shifts_yx, float)
    frames = np.flatnonzero(measured)
    if frames.size < 5 or frames[0] <= 1:
        return shifts_yx.copy(), np.zeros(2)
    used = frames[:fit_frames]
    design = np.column_stack([np.ones(used.size), used])
    coef, *_ = np.linalg.lstsq(design, shifts_yx[used], rcond=None)
    offset = -coef[0]
    corrected = shifts_yx + offset
    early = np.arange(frames[0])
    corrected[early] = np.outer(early, coef[1])
    return corrected, offset


def drift_path(images, **tracker_options) -> np.ndarray:
    """Cumulative shifts (n, 2) of a sequence of registration images relative to the first."""
    tracker = DriftTracker(**tracker_options)
    return np.array([tracker.update(image) for image in images])
