"""Appearance of a crystallizing film in a polarizing microscope, and the camera.

Specimen (moves with the stage): between crossed polarizers the melt is dark and a
spherulite with radial optic axes shows the extinction cross,
I ∝ sin²(2(φ − θ_pol)) around its own centre. With a first-order (530 nm) retardation
plate at 45° the transmitted spectrum is sin²(πR/λ) for the total retardation R: the melt
(R = plate) looks first-order red-magenta, and the spherulite adds or subtracts its own
retardation ΔR·cos(2(φ − θ_plate)) so opposite quadrant pairs turn blue and yellow.
Banding multiplies the birefringence by a cos² of the radius; a fibrillar texture is an
angular noise pattern, refined with every octave of radius so that fibrils branch, fixed
per spherulite.

Camera (fixed to the sensor): uneven illumination, dust and scratches, a global flicker,
Gaussian read noise and shot noise, 8/16-bit quantization, optional JPEG round trip; the
further effects of :mod:`analysis.synthetic.camera` (fixed-pattern and row/column noise,
defocus, illumination gradient, lamp warm-up, bubbles, exact Poisson noise).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterator

import cv2
import numpy as np
from scipy import ndimage

from analysis.synthetic import camera

_FIBRIL_ROOT_SAMPLES = 48  # fibrils around a young spherulite
_FIBRIL_PX = 2.5  # arc length of one texture sample, px (a fibril spans a few samples)
_LUT_MAX_NM = 2500

# Approximate camera channel sensitivities as Gaussians (centre nm, width nm). These are
# rough stand-ins for real colour filters, good enough to reproduce interference colours.
_CHANNELS = ((615.0, 40.0), (540.0, 35.0), (450.0, 25.0))
_DISPLAY_GAMMA = 1.0 / 2.2  # colour cameras store gamma-encoded values (sRGB-like)


def _retardation_lut() -> np.ndarray:
    """(R_nm, channel) transmission of crossed polarizers, sin²(πR/λ), averaged over
    each channel's sensitivity (flat white illuminant)."""
    wavelength = np.arange(400.0, 701.0, 2.0)
    weights = np.array([np.exp(-0.5 * ((wavelength - c) / w) ** 2) for c, w in _CHANNELS])
    weights /= weights.sum(axis=1, keepdims=True)
    retardation = np.arange(0.0, _LUT_MAX_NM + 1.0)
    spectrum = np.sin(np.pi * retardation[:, None] / wavelength[None, :]) ** 2
    return (spectrum @ weights.T).astype(np.float32)


_LUT = _retardation_lut()


def retardation_to_rgb(retardation_nm: np.ndarray) -> np.ndarray:
    """RGB transmission (0..1) between crossed polarizers for a retardation in nm."""
    r = np.clip(np.asarray(retardation_nm, dtype=np.float32), 0.0, _LUT_MAX_NM)
    lo = np.floor(r).astype(np.int32)
    hi = np.minimum(lo + 1, _LUT_MAX_NM)
    w = (r - lo)[..., None]
    return _LUT[lo] * (1.0 - w) + _LUT[hi] * w


def _plate_colour(retardation_nm, params) -> np.ndarray:
    """Camera RGB (gamma-encoded, 0..1) of a total retardation seen with the plate in."""
    return np.float32(params.brightness) * retardation_to_rgb(retardation_nm) ** np.float32(_DISPLAY_GAMMA)


def melt_colour(params) -> np.ndarray:
    """Melt appearance: grey level (shape ()) or RGB (shape (3,))."""
    if params.retardation_plate:
        return _plate_colour(params.plate_retardation_nm, params)
    return np.float32(params.melt_level)


def crystal_appearance(owner, centres_yx, origin_yx, params, rng) -> np.ndarray:
    """Fully crystallized appearance of every pixel of a grid.

    Parameters
    ----------
    owner : ndarray of int, (H, W)
        Index of the nucleus whose spherulite covers each pixel (-1: melt throughout).
    centres_yx : ndarray, (N, 2)
        Nucleus centres in the grid's pixel coordinates (row, column).
    origin_yx : tuple of int
        Pixel coordinates of the grid's element [0, 0].
    params : StackParams
    rng : numpy.random.Generator
        Draws the fibrillar texture (fixed per spherulite).

    Returns
    -------
    ndarray, float32, (H, W) grey or (H, W, 3) RGB, 0..~1
    """
    if len(centres_yx) == 0:
        melt = np.asarray(melt_colour(params), np.float32)
        return np.broadcast_to(melt, owner.shape + melt.shape).copy()
    rows, cols = np.indices(owner.shape, dtype=np.float32)
    safe = np.maximum(owner, 0)
    dy = rows + origin_yx[0] - centres_yx[safe, 0].astype(np.float32)
    dx = cols + origin_yx[1] - centres_yx[safe, 1].astype(np.float32)
    azimuth = np.arctan2(dy, dx)
    radius_px = np.hypot(dy, dx)
    strength = _band_factor(radius_px * np.float32(params.um_per_px), params) * _texture(
        azimuth, radius_px, owner, len(centres_yx), params, rng)
    pol = math.radians(params.polarizer_angle_deg)
    melted = owner < 0
    if params.retardation_plate:
        sign = 1.0 if params.spherulite_sign == "positive" else -1.0
        plate_axis = pol + math.pi / 4.0
        added = sign * params.spherulite_retardation_nm * strength * np.cos(2.0 * (azimuth - plate_axis))
        image = _plate_colour(params.plate_retardation_nm + added, params)
        image[melted] = melt_colour(params)
        return image.astype(np.float32)
    image = params.melt_level + params.brightness * np.sin(2.0 * (azimuth - pol)) ** 2 * strength
    image[melted] = params.melt_level
    return image.astype(np.float32)


def _band_factor(radius_um, params) -> np.ndarray:
    """Concentric banding: birefringence × ((1 − c) + c cos²(π r / P))."""
    if params.band_period_um <= 0 or params.band_contrast <= 0:
        return np.ones_like(radius_um)
    c = np.float32(params.band_contrast)
    return (1.0 - c) + c * np.cos(np.float32(math.pi / params.band_period_um) * radius_um) ** 2


def _texture(azimuth, radius_px, owner, n_owners, params, rng) -> np.ndarray:
    """Radial fibrils that branch outwards: 1 + c·f(φ, r), fixed per spherulite.

    f is angular noise whose number of samples doubles with every octave of radius, each
    octave refining the previous one, so fibrils keep a width of a few pixels, continue
    outwards and split. Each spherulite sees the pattern turned by its own offset.
    """
    if params.texture_contrast <= 0:
        return np.ones_like(azimuth)
    r0 = _FIBRIL_ROOT_SAMPLES * _FIBRIL_PX / (2 * math.pi)
    levels = max(2, int(math.ceil(math.log2(max(float(radius_px.max()), r0) / r0))) + 2)
    tables = _fibril_tables(levels, rng)
    starts = np.cumsum([0] + [len(t) for t in tables[:-1]])
    flat = np.concatenate(tables)
    octave = np.log2(np.maximum(radius_px, np.float32(r0)) / np.float32(r0))
    level = np.minimum(octave.astype(np.int64), levels - 2)
    blend = np.clip(octave - level, 0.0, 1.0).astype(np.float32)
    turn = rng.random(max(n_owners, 1))[np.maximum(owner, 0)]
    where = (azimuth + np.float32(math.pi)) / np.float32(2 * math.pi) + turn  # in turns

    def sample(lv):
        length = _FIBRIL_ROOT_SAMPLES * (2 ** lv)
        return flat[starts[lv] + (where * length).astype(np.int64) % length]

    pattern = (1.0 - blend) * sample(level) + blend * sample(level + 1)
    return np.clip(1.0 + np.float32(params.texture_contrast) * pattern, 0.0, None)


def _fibril_tables(levels: int, rng) -> list[np.ndarray]:
    """Periodic angular noise per radius octave, unit variance; octave b has
    ROOT·2^b samples and keeps the fibrils of octave b − 1 (repeated, smoothed)."""
    unit = lambda a: ((a - a.mean()) / (a.std() + 1e-12)).astype(np.float32)
    smooth = lambda a: ndimage.gaussian_filter1d(a, 1.0, mode="wrap")
    tables = [unit(smooth(rng.standard_normal(_FIBRIL_ROOT_SAMPLES)))]
    for _ in range(1, levels):
        kept = smooth(np.repeat(tables[-1], 2))
        tables.append(unit(0.75 * unit(kept) + 0.66 * unit(smooth(rng.standard_normal(kept.size)))))
    return tables


def sensor_transmission(shape, params, rng) -> np.ndarray:
    """Illumination × dust on the sensor (fixed in the image, present in every frame)."""
    height, width = shape
    rows, cols = np.indices(shape, dtype=np.float32)
    r2 = ((rows - (height - 1) / 2) ** 2 + (cols - (width - 1) / 2) ** 2) / (
        ((height - 1) / 2) ** 2 + ((width - 1) / 2) ** 2 + 1e-6
    )
    illumination = 1.0 - np.float32(params.vignetting) * r2
    return illumination * _dust(shape, params, rng)


def _dust(shape, params, rng) -> np.ndarray:
    """Dark specks and thin scratches: a transmission map in [0, 1]."""
    height, width = shape
    opacity = np.zeros(shape, np.float32)
    for _ in range(params.dust_specks):
        centre = (int(rng.integers(0, width)), int(rng.integers(0, height)))
        cv2.circle(opacity, centre, int(rng.integers(1, 5)), float(rng.uniform(0.3, 0.8)), -1)
    for _ in range(params.scratches):
        start = np.array([rng.uniform(0, width), rng.uniform(0, height)])
        direction = rng.uniform(0, 2 * math.pi)
        length = rng.uniform(0.2, 0.6) * max(shape)
        end = start + length * np.array([math.cos(direction), math.sin(direction)])
        cv2.line(opacity, tuple(int(v) for v in start), tuple(int(v) for v in end),
                 float(rng.uniform(0.2, 0.5)), 1, cv2.LINE_AA)
    opacity = cv2.GaussianBlur(opacity, (0, 0), 0.7)
    return 1.0 - np.clip(opacity, 0.0, 0.95)


def add_noise(image, params, rng) -> np.ndarray:
    """Gaussian read noise plus shot noise (Gaussian approximation of Poisson)."""
    variance = np.float32(params.read_noise) ** 2
    if params.photons_full_scale > 0:
        variance = variance + np.clip(image, 0.0, None) / np.float32(params.photons_full_scale)
    noise = rng.standard_normal(image.shape, dtype=np.float32)
    return image + np.sqrt(variance) * noise


def quantize(image, params) -> np.ndarray:
    """0..1 float to 8- or 16-bit integers, with an optional JPEG round trip."""
    full = 255 if params.bit_depth == 8 else 65535
    dtype = np.uint8 if params.bit_depth == 8 else np.uint16
    out = np.clip(image * full + 0.5, 0, full).astype(dtype)
    if params.jpeg_quality > 0:
        out = _jpeg_round_trip(out, params.jpeg_quality)
    return out


def _jpeg_round_trip(frame: np.ndarray, quality: int) -> np.ndarray:
    """Compress and decompress one frame with OpenCV's JPEG codec (8-bit data)."""
    eight = frame if frame.dtype == np.uint8 else (frame >> 8).astype(np.uint8)
    bgr = eight[..., ::-1] if eight.ndim == 3 else eight
    ok, encoded = cv2.imencode(".jpg", np.ascontiguousarray(bgr), [cv2.IMWRITE_JPEG_QUALITY, int(quality)])
    if not ok:
        raise RuntimeError("OpenCV could not JPEG-encode a frame")
    flag = cv2.IMREAD_COLOR if eight.ndim == 3 else cv2.IMREAD_GRAYSCALE
    decoded = cv2.imdecode(encoded, flag)
    decoded = decoded[..., ::-1] if eight.ndim == 3 else decoded
    return decoded if frame.dtype == np.uint8 else decoded.astype(np.uint16) * 257


@dataclass(frozen=True)
class SyntheticStack:
    """A simulated recording: its true kinetics and lazily rendered frames.

    Made by :func:`analysis.synthetic.hot_stage.simulate_stack`. Frames are rendered on demand from
    the arrival map (computed once), so memory stays at a few frames whatever the length.

    Attributes
    ----------
    params : StackParams
    kinetics : FilmKinetics
        Nuclei, arrival-time and owner maps (padded grid, isothermal clock).
    times_s : ndarray
        Frame times, recording clock, s.
    drift_px : ndarray, (n_frames, 2)
        Specimen displacement (dy, dx) on the sensor per frame, px (frame 0: zero).
    area_fraction : ndarray
        True transformed area fraction of frame 0's field at each frame.
    """

    params: Any
    kinetics: Any
    times_s: np.ndarray
    drift_px: np.ndarray
    area_fraction: np.ndarray
    melt: np.ndarray = field(repr=False)
    contrast: np.ndarray = field(repr=False)  # fully crystalline minus melt, padded grid
    sensor: np.ndarray = field(repr=False)  # illumination × dust, field grid
    gain: np.ndarray = field(repr=False)  # flicker, per frame
    # Growth on a temperature programme: (S at each frame, S at each padded pixel's arrival),
    # S = ∫ G dt in px; the soft front is then drawn in S instead of in time × constant G.
    growth_px: Any = field(default=None, repr=False)

    def __len__(self) -> int:
        return self.params.n_frames

    @property
    def arrival_s(self) -> np.ndarray:
        """True arrival time on frame 0's grid, recording clock, s (float32, inf = never)."""
        return self.kinetics.arrival_field_s + np.float32(self.params.isothermal_start_s)

    @property
    def owner(self) -> np.ndarray:
        """Owner of each pixel of frame 0's grid: index into ``kinetics.centres_yx`` (-1: none)."""
        return self.kinetics.owner_field

    def frame(self, index: int) -> np.ndarray:
        """Render frame ``index``: (H, W) or (H, W, 3), uint8 or uint16."""
        p = self.params
        if self.growth_px is None:
            t_iso = float(self.times_s[index]) - p.isothermal_start_s
            g_px_per_s = p.growth_rate_um_per_min / 60.0 / p.um_per_px
            crystal = np.subtract(np.float32(t_iso), self.kinetics.arrival_pad_s, dtype=np.float32)
            crystal *= np.float32(g_px_per_s / p.front_width_px)  # soft front, ~front_width_px wide
        else:
            s_frame, s_pad = self.growth_px
            crystal = np.subtract(s_frame[index], s_pad, dtype=np.float32)
            crystal /= np.float32(p.front_width_px)
        crystal += np.float32(0.5)
        np.clip(crystal, 0.0, 1.0, out=crystal)
        if self.contrast.ndim == 3:
            crystal = crystal[..., None]
        image = camera.defocus(self._shifted(self.melt + crystal * self.contrast, self.drift_px[index]), p)
        image *= self.sensor
        image *= self.gain[index]
        noise_rng = np.random.default_rng([p.seed, 2, index])
        noisy = camera.poisson_gaussian_noise(image, p, noise_rng) if p.exact_poisson and \
            p.photons_full_scale > 0 else add_noise(image, p, noise_rng)
        offsets = camera.row_column_offsets(noisy.shape[:2], p, index)
        if offsets is not None:
            noisy += offsets if noisy.ndim == 2 else offsets[..., None]
        return quantize(noisy, p)

    def frames(self, start: int = 0, stop: int | None = None) -> Iterator[np.ndarray]:
        """Generator of rendered frames."""
        for index in range(start, len(self) if stop is None else stop):
            yield self.frame(index)

    def _shifted(self, specimen: np.ndarray, shift_yx) -> np.ndarray:
        """Crop the padded specimen image to the sensor, moved by (dy, dx) px."""
        p, pad = self.params, self.kinetics.pad_px
        dy, dx = float(shift_yx[0]), float(shift_yx[1])
        if dy == 0.0 and dx == 0.0:
            return specimen[pad:pad + p.height_px, pad:pad + p.width_px].copy()
        matrix = np.float32([[1, 0, dx - pad], [0, 1, dy - pad]])  # dst(x, y) = src(x - dx + pad, ...)
        return cv2.warpAffine(specimen, matrix, (p.width_px, p.height_px), flags=cv2.INTER_LINEAR,
                              borderMode=cv2.BORDER_REPLICATE)
