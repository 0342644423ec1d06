"""Imaging effects of a real microscope camera, each independent and off by default.

They stress the detection with what recordings show in practice and the basic renderer
in :mod:`analysis.synthetic.optics` lacks:

- sensor noise that is Poisson in the photons plus Gaussian read noise (the
  Poisson-Gaussian model of Foi et al. 2008, IEEE Trans. Image Process. 17, 1737);
- per-pixel gain differences (photo-response non-uniformity, fixed in every frame) and
  row/column offsets that change from frame to frame (read-out electronics; Janesick 2007,
  Photon Transfer, SPIE Press);
- defocus, as a Gaussian blur of the specimen image;
- an illumination gradient across the field and a lamp that warms up over the run;
- gas bubbles in the film: no crystal grows inside, and their rim scatters light.

Every effect draws from its own random stream, so switching one on leaves the others
(and every earlier simulation) unchanged.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

__all__ = ["sensor_gain_pattern", "illumination_gradient", "lamp_levels", "row_column_offsets",
           "defocus", "bubble_maps", "poisson_gaussian_noise"]


def sensor_gain_pattern(shape, params) -> np.ndarray:
    """Per-pixel gain 1 + ε, ε ~ N(0, ``gain_fpn``), fixed over the recording (float32)."""
    if params.gain_fpn <= 0:
        return np.ones(shape, np.float32)
    rng = np.random.default_rng([params.seed, 10])
    return (1.0 + params.gain_fpn * rng.standard_normal(shape)).astype(np.float32)


def illumination_gradient(shape, params) -> np.ndarray:
    """Light falling linearly by ``illumination_gradient`` (fraction) across the field
    along ``gradient_angle_deg`` (degrees from the x axis towards +y): 1 on the bright
    side, 1 − gradient on the dark side."""
    if params.illumination_gradient <= 0:
        return np.ones(shape, np.float32)
    rows, cols = np.indices(shape, dtype=np.float32)
    angle = math.radians(params.gradient_angle_deg)
    along = cols * math.cos(angle) + rows * math.sin(angle)
    span = max(float(along.max() - along.min()), 1e-6)
    return (1.0 - params.illumination_gradient * (along - along.min()) / span).astype(np.float32)


def lamp_levels(times_s, params) -> np.ndarray:
    """Relative lamp output per frame: starts ``lamp_warmup`` (fraction) low and warms up
    exponentially with time constant ``lamp_warmup_tau_s``."""
    times = np.asarray(times_s, np.float64)
    if params.lamp_warmup <= 0:
        return np.ones(times.size, np.float32)
    tau = max(params.lamp_warmup_tau_s, 1e-6)
    return (1.0 - params.lamp_warmup * np.exp(-(times - times[0]) / tau)).astype(np.float32)


def row_column_offsets(shape, params, index) -> np.ndarray | None:
    """Additive offsets of whole rows and columns in frame ``index`` (fraction of full
    scale, std ``row_column_noise``), or None when off."""
    if params.row_column_noise <= 0:
        return None
    rng = np.random.default_rng([params.seed, 11, index])
    rows = rng.standard_normal(shape[0]).astype(np.float32)[:, None]
    cols = rng.standard_normal(shape[1]).astype(np.float32)[None, :]
    return np.float32(params.row_column_noise / math.sqrt(2.0)) * (rows + cols)


def defocus(image: np.ndarray, params) -> np.ndarray:
    """The specimen image seen out of focus: Gaussian of ``defocus_blur_px`` (σ, px)."""
    if params.defocus_blur_px <= 0:
        return image
    return cv2.GaussianBlur(image, (0, 0), params.defocus_blur_px, borderType=cv2.BORDER_REFLECT)


def bubble_maps(shape, params) -> tuple[np.ndarray, np.ndarray]:
    """Bubbles on the padded specimen grid: (solid, rim) float32 maps.

    ``solid`` is 1 where crystal can exist and 0 inside a bubble; ``rim`` is the light a
    bubble's edge scatters (fraction of full scale), present in the melt as well.
    """
    solid = np.ones(shape, np.float32)
    rim = np.zeros(shape, np.float32)
    if params.bubbles <= 0:
        return solid, rim
    rng = np.random.default_rng([params.seed, 12])
    for _ in range(params.bubbles):
        centre = (int(rng.integers(0, shape[1])), int(rng.integers(0, shape[0])))
        radius = int(rng.integers(4, 16))
        cv2.circle(solid, centre, radius, 0.0, -1, cv2.LINE_AA)
        cv2.circle(rim, centre, radius, float(rng.uniform(0.08, 0.2)), 2, cv2.LINE_AA)
    return solid, cv2.GaussianBlur(rim, (0, 0), 0.8)


def poisson_gaussian_noise(image: np.ndarray, params, rng) -> np.ndarray:
    """Photon counts drawn from a Poisson law (``photons_full_scale`` photons at full
    scale) plus Gaussian read noise of ``read_noise`` (fraction of full scale)."""
    photons = float(params.photons_full_scale)
    counts = rng.poisson(np.clip(image, 0.0, None) * photons).astype(np.float32) / np.float32(photons)
    return counts + np.float32(params.read_noise) * rng.standard_normal(image.shape, dtype=np.float32)
