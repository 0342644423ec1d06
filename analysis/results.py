"""Result types of the analysis of one experiment (one stack at one Tc).

These frozen dataclasses are the contract between the pipeline, the exports, the CLI and
the GUI. Field names carry units. Coordinates: x = column, y = row, pixel centres at
integers, top-left pixel = (0, 0). Times are seconds from the isothermal start (the
moment the sample reached Tc), not from the first frame. Unknown values are ``None``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from analysis.edits import Edit

#: Spherulite statuses are defined, with their thresholds and reasons, in
#: ``analysis.spherulites.statuses``. Only ``ok`` spherulites enter the pooled growth rate;
#: ``rejected`` candidates count nowhere (see ``reason``).
SOURCES = ("auto", "manual")
NUCLEATION_MODES = ("athermal", "thermal", "mixed")

#: The three counts a result reports: key -> (label, what it counts). The keys name the
#: JSON fields, CSV columns and help topics; the labels head every panel and table, so a
#: count reads the same wherever it appears.
COUNTS: dict[str, tuple[str, str]] = {
    "spherulites_detected": (
        "Spherulites detected",
        "every spherulite the analysis reports, found automatically or added by hand "
        "(deleted and merged detections and rejected candidates not), whatever its status"),
    "nuclei_counted": (
        "Nuclei counted",
        "nuclei whose centre lies inside the field, with a nucleation time, not cut by the "
        "border and growing like their neighbours: the count behind the nucleation density "
        "N_A, the nucleation rate and the mode"),
    "spherulites_in_pooled_g": (
        "Spherulites in pooled G",
        "spherulites with status ok and a usable growth fit: the ones pooled into the "
        "experiment's growth rate G"),
}


@dataclass(frozen=True)
class Spherulite:
    """One spherulite: its nucleus, its growth fit and how it may be used."""

    id: int
    x_px: float
    y_px: float
    nucleation_time_s: float | None
    first_seen_s: float | None
    growth_rate_um_per_min: float | None
    growth_rate_ci95_um_per_min: float | None
    r2: float | None
    n_points: int  # distinct frames among the pixels of the cone fit
    status: str
    source: str = "auto"
    reason: str = ""  # why this status, with the numbers that decided it; notes such as
    #                   nucleation before the isothermal start
    growth_rate_se_um_per_min: float | None = None  # standard error of the cone fit's G
    confidence: float | None = None  # 0..1 from the evidence (analysis.spherulites.evidence_checks)

    def radius_um_at(self, time_s: float) -> float | None:
        """Radius of the fitted front at ``time_s`` (0 before nucleation), in µm."""
        if self.growth_rate_um_per_min is None or self.nucleation_time_s is None:
            return None
        return max(0.0, self.growth_rate_um_per_min * (time_s - self.nucleation_time_s) / 60.0)


@dataclass(frozen=True)
class RadiusSeries:
    """Measured radii of one spherulite: the data the growth fit is made on.

    ``free_fraction`` is the fraction of directions around the centre along which the
    front was still growing freely (not impinged, not outside the field) at that frame.
    """

    id: int
    time_s: np.ndarray
    radius_um: np.ndarray
    free_fraction: np.ndarray
    used: np.ndarray  # bool: the sample entered the fit (not ignored, front free enough)

    def n_used(self) -> int:
        """Radii measured while the front grew freely: the count the few-points rule uses."""
        return int(np.count_nonzero(self.used))


@dataclass(frozen=True)
class PooledGrowthRate:
    """Pooled G (µm/min) and its 95 % interval: the between-spherulite scatter (random
    effects) and the recording's shared timing uncertainty ``systematic_rel`` (relative
    standard uncertainty) combined in quadrature."""

    value: float | None
    ci95_low: float | None
    ci95_high: float | None
    n: int
    systematic_rel: float = 0.0

    @property
    def ci95_half_width(self) -> float | None:
        """Half the width of the 95 % interval, µm/min (None when unknown): the "±" every
        page and table shows."""
        if self.ci95_low is None or self.ci95_high is None:
            return None
        return (self.ci95_high - self.ci95_low) / 2.0


@dataclass(frozen=True)
class Nucleation:
    count: int
    mode: str | None
    density_per_mm2: float | None
    density_per_mm3: float | None
    rate_per_mm2_per_min: float | None
    rate_per_mm3_per_min: float | None
    induction_time_s: float | None
    mode_test: str = ""  # the statistical criterion used and its outcome, in words
    # Nuclei of the initial burst per mm^2 (the predetermined part; for "mixed" this is
    # the athermal density, smaller than density_per_mm2 which counts every nucleus).
    burst_density_per_mm2: float | None = None
    # Nucleation times (s from the isothermal start) of the counted nuclei, ascending.
    times_s: tuple[float, ...] = ()
    # 95 % intervals (Garwood exact Poisson intervals on the counts, docs/sources.md
    # "Uncertainty"); None where the value is unknown.
    density_per_mm2_ci95: tuple[float, float] | None = None
    density_per_mm3_ci95: tuple[float, float] | None = None
    rate_per_mm2_per_min_ci95: tuple[float, float] | None = None
    rate_per_mm3_per_min_ci95: tuple[float, float] | None = None
    # What the resampling of the prediction needs: the field area (mm^2), and the births
    # the rate rests on with their melt exposure (mm^2 s).
    field_area_mm2: float | None = None
    late_count: int = 0
    late_exposure_mm2_s: float | None = None


@dataclass(frozen=True)
class AvramiParameters:
    """X(t) = 1 - exp(-k t^n), t in minutes from the isothermal start (or induction)."""

    n: float | None
    k_per_min_n: float | None
    t_half_min: float | None
    geometry: str | None = None  # "film-2d" or "bulk-3d" for predictions
    r2: float | None = None


@dataclass(frozen=True)
class ImageQuality:
    """What the recording allowed, measured from the recording itself.

    Attributes
    ----------
    noise : float
        Temporal noise of the melt, fraction of the data's full scale (per pixel, one frame).
    crystal_noise : float | None
        The same for crystalline pixels of the last frames (larger with shot noise; a dark
        melt clipped at zero shows less noise than the crystal); None when too few.
    contrast : float | None
        Typical crystal/melt difference (median over crystalline pixels of the last frame),
        fraction of full scale; None when nothing crystallised.
    snr : float | None
        ``contrast`` over the larger of the two noises: the signal-to-noise ratio of one
        pixel in one frame.
    smoothing_px : float
        Gaussian sigma (px) chosen from ``snr`` for the evidence (wider when noisier).
    unresolved_fraction : float | None
        Fraction of the crystallised field whose arrival time was not measured but
        inferred (extinction wedges, pixels too faint to time); None when none crystallised.
    blur_px : float | None
        Gaussian sigma (px) of the crystal/melt edge beyond the smoothing applied
        (defocus and front softness together); None when it could not be measured.
    illumination_unevenness : float | None
        1 − (5th / 95th percentile) of the slowly varying brightness across the field.
    verdict : str
        One sentence in plain language; says so when the recording is too poor for
        automatic counting.
    too_poor : bool
    """

    noise: float
    crystal_noise: float | None
    contrast: float | None
    snr: float | None
    smoothing_px: float
    unresolved_fraction: float | None
    blur_px: float | None
    illumination_unevenness: float | None
    verdict: str
    too_poor: bool


@dataclass(frozen=True)
class ExperimentResult:
    """Everything the analysis of one stack found, with the user's edits applied."""

    stack: str
    frames: int
    um_per_px: float
    interval_s: float | None
    temperature_c: float | None
    thickness_um: float | None
    spherulites: tuple[Spherulite, ...]
    radii: tuple[RadiusSeries, ...]
    growth_rate: PooledGrowthRate
    nucleation: Nucleation
    area_fraction_time_s: np.ndarray
    area_fraction: np.ndarray
    unapplied_edits: tuple[Edit, ...] = ()
    warnings: tuple[str, ...] = ()
    extra: dict[str, Any] = field(default_factory=dict)
    image_quality: ImageQuality | None = None

    def counts(self) -> dict[str, int]:
        """The :data:`COUNTS` of this result, by key."""
        return {"spherulites_detected": sum(1 for s in self.spherulites if s.status != "rejected"),
                "nuclei_counted": int(self.nucleation.count),
                "spherulites_in_pooled_g": int(self.growth_rate.n)}

    def spherulite(self, spherulite_id: int) -> Spherulite:
        for s in self.spherulites:
            if s.id == spherulite_id:
                return s
        raise KeyError(spherulite_id)

    def next_detection_id(self) -> int:
        """The id a nucleus added now takes: above every id used so far, including those
        of deleted and merged detections (an id is never given twice)."""
        used = max((s.id for s in self.spherulites), default=0) + 1
        return max(int(self.extra.get("next_detection_id", used)), used)
