"""Named detection heuristics: every threshold the detection relies on, in one frozen object.

Each field states what it decides and why it has its value (a published source, a
physical argument, or ``common practice`` / ``tuned`` with the seeds it was tuned on), so
that a benchmark can sweep any of them without editing code::

    from analysis import heuristics
    with heuristics.overridden(threshold_noise_widths=8.0):
        run_benchmark()

The analysis modules read :func:`current` at the moment they need a value; outside an
``overridden`` block that is :data:`DEFAULT`. The active object lives in a
:class:`contextvars.ContextVar`, so an override in one thread never leaks into another.
This is a leaf module: it imports nothing from the project.
"""

from __future__ import annotations

import contextlib
import contextvars
from dataclasses import dataclass, field, fields, replace
from typing import Iterator

__all__ = ["DetectionHeuristics", "DEFAULT", "current", "overridden", "describe"]


def _h(default, why: str):
    """A heuristic: its value and the sentence that justifies it."""
    return field(default=default, metadata={"why": why})


@dataclass(frozen=True)
class DetectionHeuristics:
    """Thresholds of the detection, each with its reason (see the ``why`` metadata)."""

    # ---- evidence against the melt (analysis.arrival.evidence)
    noise_floor_dn: float = _h(
        0.3, "Smallest noise sigma credited to integer data, DN: uniform quantization alone "
        "leaves 1/sqrt(12) = 0.29 DN (Widrow & Kollar 2008, Quantization Noise, Cambridge "
        "University Press).")
    blind_transmission: float = _h(
        0.35, "A pixel passing less than this fraction of the light of the melt around it is "
        "dense dust and carries no information (common practice).")
    threshold_noise_widths: float = _h(
        10.0, "Detection threshold in robust spreads of the melt's evidence above its median: "
        "with the persistence rule, a Gaussian tail this far out is crossed by no melt pixel "
        "in a recording (common practice).")
    threshold_floor_noise_units: float = _h(
        1.0, "Lowest detection threshold above the melt median, in noise units: keeps the "
        "threshold meaningful when the melt evidence has almost no spread (quantized data).")
    frame0_threshold_factor: float = _h(
        2.0, "Crystals already present in the first frame need this many detection "
        "thresholds of spatial evidence: they are judged from one frame, without a melt "
        "frame to compare with (common practice).")
    frame0_front_fraction: float = _h(
        0.5, "The edge of a frame-0 crystal is where its evidence falls to this fraction of "
        "the local peak: a soft front is half-way at its centre (symmetry of the front).")
    # ---- smoothing chosen from the measured image quality (analysis.arrival.quality)
    target_smoothed_snr: float = _h(
        13.0, "The evidence smoothing is widened until the median crystal pixel (half the bright "
        "quadrants' contrast) stands this many smoothed-noise sigmas above the melt: the "
        "threshold sits about 6.5 sigmas up (ten robust spreads of the folded melt evidence) "
        "and the brighter half of the crystal, at least twice that, is timed without "
        "threshold bias (tuned on stress seeds 1-3 between 10 and 16).")
    max_adaptive_smoothing_px: float = _h(
        3.5, "Largest Gaussian sigma the adaptive smoothing may choose, px: wider smoothing "
        "merges nuclei closer than about three sigma and rounds the cone apex.")
    speck_area_factor: float = _h(
        1.0, "Isolated crystalline patches smaller than this many smoothing-kernel areas "
        "pi (2 sigma)^2 are noise: one smoothed noise blob covers about that area.")
    # ---- image-quality verdicts (analysis.arrival.quality)
    poor_snr: float = _h(
        1.0, "Below this crystal/melt contrast per melt-noise sigma (one pixel, one frame) "
        "even the widest smoothing cannot separate crystal from melt reliably; the "
        "recording is too poor for automatic counting (common practice).")
    poor_unresolved_fraction: float = _h(
        0.6, "When more than this fraction of the crystallised field has no measured arrival "
        "time, the nuclei cannot be counted automatically: between crossed polarizers the "
        "extinction arms alone, always inferred, cover up to about 40 % (common practice).")
    uneven_illumination: float = _h(
        0.5, "Brightness falling by more than this fraction across the field is reported as "
        "uneven illumination worth correcting at the microscope (common practice).")
    # ---- timing and registration (analysis.arrival.arrival_map)
    rise_thresholds: float = _h(
        0.25, "A pixel whose mean evidence over its last three tracked frames exceeds that of "
        "the three before by more than this many detection thresholds is still rising and is "
        "followed for another window: the threshold is ten robust spreads of the melt's "
        "evidence, so this is 2.5 spreads of one frame, over 3 of a three-frame mean "
        "difference (common practice: a 3-sigma test).")
    rise_fraction: float = _h(
        0.1, "... and by more than this fraction of its level: a front passing a pixel at a "
        "third of a pixel per frame, across a front and smoothing kernel about 5 px wide, still "
        "adds some 20 % in three frames, while a crystal slowly brightening (or the kernel "
        "around a young nucleus filling up) adds a few per cent and its half-way time is "
        "already right (set on heating-run seeds 3-8 and sporadic accuracy seed 12).")
    max_tracking_windows: int = _h(
        4, "A pixel is followed for at most this many tracking windows: enough for fronts down "
        "to about a tenth of a pixel per frame, where G(T) is unusable anyway (common practice).")
    reliable_contrast_thresholds: float = _h(
        2.5, "A pixel whose plateau evidence exceeds this many thresholds was detected "
        "after its half-plateau crossing, so its time does not depend on the threshold "
        "(half-plateau timing: detection at one threshold = 1/2.5 of the plateau < 1/2).")
    settle_frames: int = _h(
        6, "Frames after detection before a pixel's content is steady enough to register "
        "the drift on (a front a few pixels wide has passed by then; common practice).")
    # ---- nuclei missed by the minima (analysis.spherulites.nuclei.missed_nuclei)
    missed_deficit_intervals: float = _h(
        1.5, "A region that crystallises this many frame intervals earlier than every fitted "
        "cone predicts holds a nucleus of its own: one interval is the timing quantum, half "
        "more allows for timing noise. The most a deficit must reach; see "
        "missed_deficit_sigmas.")
    missed_deficit_sigmas: float = _h(
        4.0, "A deficit also counts once it exceeds this many robust standard deviations of "
        "the field's arrival residuals about the fitted cones (common practice): when "
        "arrivals are resolved within a frame, a nucleus born just ahead of a front leads "
        "it by less than one interval. On arrivals at frame times (uniform error of ±half "
        "an interval) it equals missed_deficit_intervals.")
    missed_slope_tolerance: float = _h(
        0.25, "A missed nucleus's own cone must grow within this relative difference of the "
        "field's mean slope: one temperature, one growth rate (Lauritzen & Hoffman 1960, "
        "J. Res. Natl. Bur. Stand. 64A, 73) with room for timing noise.")
    missed_apex_px: float = _h(
        3.0, "The apex of a missed nucleus's cone must lie within this distance of its region "
        "and farther than this from every known nucleus, px (pixel-scale fit precision).")
    # ---- two nuclei in one territory (analysis.spherulites.nuclei.split_candidates)
    split_residual_ratio: float = _h(
        1.5, "Territories whose residual scale exceeds this multiple of the field's typical "
        "one are tested for two nuclei (common practice).")
    split_cost_ratio: float = _h(
        0.5, "Two cones replace one when their robust cost is below this fraction of the "
        "single cone's (the extra three parameters must buy a large gain; common practice).")
    split_lopsided_cost_ratio: float = _h(
        0.25, "Below this fraction of the single cone's cost a lopsided split (one cone "
        "reaching few pixels first) is still accepted: clusters present in the first frame "
        "show little of their inner cones.")
    split_min_share: float = _h(
        0.15, "Each cone of a split must reach at least this share of the pixels first.")
    split_min_share_lopsided: float = _h(
        0.05, "Share each cone must reach first when the cost gain is very large (see "
        "split_lopsided_cost_ratio).")
    split_min_separation_px: float = _h(
        3.0, "Apexes of a split must be at least this far apart, px (pixel-scale fit precision).")
    split_evidence_bic: float = _h(
        6.0, "Two cones replace one when their Schwarz criterion (Schwarz 1978, Ann. Stat. 6, "
        "461), counted on independent samples with the measured arrival-time noise, is lower "
        "by more than this: 'strong' evidence on the scale of Kass & Raftery 1995, J. Am. "
        "Stat. Assoc. 90, 773.")
    pair_min_separation_px: float = _h(
        1.0, "Apexes of a split accepted on the model comparison must be at least this far "
        "apart, px: closer than one pixel the grid itself cannot place them apart.")
    split_slope_tolerance: float = _h(
        0.25, "The common slope of a split must be within this relative difference of the "
        "field's mean slope (one growth rate per temperature, see missed_slope_tolerance).")
    # ---- counting (analysis.spherulites.evaluation)
    few_points_g_tolerance: float = _h(
        0.30, "A few-points detection counts as a nucleus when its growth rate is within this "
        "relative difference of the field's median G: a real late nucleus grows like its "
        "neighbours, dust does not (common practice).")
    min_radius_px: float = _h(
        3.0, "Radii below this are limited by the pixel grid and stay out of the linearity "
        "test, px.")
    # ---- evidence-based rejection and confidence (analysis.spherulites.evidence_checks)
    reject_min_levels: int = _h(
        5, "A candidate whose cone is fitted on fewer distinct frames than this has no growth "
        "history of its own: a four-parameter cone needs at least one more level than "
        "parameters to leave a residual at all (one fewer when its slope is held at the "
        "field's: three parameters).")
    reject_max_slope_deviation: float = _h(
        0.5, "A candidate whose growth rate differs from the field's by more than this relative "
        "amount does not grow like a spherulite at this temperature (one growth rate per "
        "temperature, Lauritzen & Hoffman 1960; generous for noisy fits).")
    reject_residual_ratio: float = _h(
        3.0, "A short-lived candidate (fewer than twice reject_min_levels frames) whose robust "
        "residual scale exceeds this multiple of the field's typical one does not follow one "
        "growing front: a noise island or the seam between fronts. A long-lived one is more "
        "likely two merged nuclei and goes to review instead (common practice).")
    edge_centre_uncertainty: float = _h(
        0.5, "A spherulite entering from outside is reported only when the 95 % uncertainty of "
        "its fitted centre is below this fraction of the centre's distance outside the field "
        "(and at least edge_centre_floor_px): a short arc locates its centre no better "
        "(common practice).")
    edge_centre_floor_px: float = _h(
        5.0, "Smallest centre uncertainty always accepted for a spherulite entering from "
        "outside, px (a few pixels: the precision of an inside centre).")
    same_centre_px: float = _h(
        2.0, "Two fitted centres closer than this are the same within pixel precision (a pair "
        "of real nuclei this close cannot be told apart), px.")
    duplicate_agreement_intervals: float = _h(
        1.0, "Two cones whose arrival times over their pixels differ by less than this many "
        "frame intervals (median) describe the same front: the timing quantum.")
    doubtful_confidence: float = _h(
        0.6, "Detections whose confidence is below this are offered for review first "
        "(common practice).")


DEFAULT = DetectionHeuristics()
_ACTIVE: contextvars.ContextVar[DetectionHeuristics] = contextvars.ContextVar("heuristics", default=DEFAULT)


def current() -> DetectionHeuristics:
    """The heuristics in force (``DEFAULT`` outside an :func:`overridden` block)."""
    return _ACTIVE.get()


@contextlib.contextmanager
def overridden(**changes) -> Iterator[DetectionHeuristics]:
    """Run a block with some heuristics changed (for benchmarks and sweeps).

    Raises
    ------
    TypeError
        A name that is not a heuristic.
    """
    known = {f.name for f in fields(DetectionHeuristics)}
    unknown = sorted(set(changes) - known)
    if unknown:
        raise TypeError(f"not a detection heuristic: {', '.join(unknown)}")
    token = _ACTIVE.set(replace(_ACTIVE.get(), **changes))
    try:
        yield _ACTIVE.get()
    finally:
        _ACTIVE.reset(token)


def describe() -> list[tuple[str, object, str]]:
    """(name, value in force, reason) of every heuristic, in declaration order."""
    active = current()
    return [(f.name, getattr(active, f.name), f.metadata["why"]) for f in fields(DetectionHeuristics)]
