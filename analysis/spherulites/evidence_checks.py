"""Never more nuclei than the evidence supports: rejection with a reason, and confidence.

A candidate (a minimum of the arrival map, a region that crystallised early, one half of
a split) is a spherulite only when its pixels show one front growing at the field's
rate. After the cone fits, each automatic candidate is checked against that evidence
(thresholds in :mod:`analysis.heuristics`); one that fails becomes ``rejected`` with the
reason in words. Rejected rows are kept (the viewer lists them on request and one
``include`` edit promotes one back), but they never count toward the nucleus density or
the pooled growth rate.

Every detection also gets a confidence in [0, 1] from its evidence: frames of growth,
fit residuals against the field's typical ones, agreement of its growth rate with the
field's, precision of its nucleation time, closeness to another nucleus and to the edge
of the field. The review queue offers the least confident first.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from analysis import heuristics
from analysis.spherulites import growth, nuclei

__all__ = ["Evidence", "judge", "confidence", "best_frame", "review_order", "nearest_other_px"]


@dataclasses.dataclass(frozen=True)
class Evidence:
    """What one detection's cone fit rests on."""

    fit: growth.ConeFit
    residual_s: float          # robust residual scale of the fit, s (nan without a fit)
    x: np.ndarray              # fitted pixels (columns, rows, arrival times)
    y: np.ndarray
    t: np.ndarray
    user_included: bool        # the user forced it to count (an ``include`` edit)
    automatic: bool            # found by the analysis, not added by hand
    in_first_frame: bool = False  # its marker lies in crystal already present in the first frame


def _field_slope(items) -> float:
    slopes = [e.fit.slope_s_per_px for s, e in items if e.fit.ok and s.status == "ok"]
    return float(np.median(slopes)) if slopes else float("nan")


def _typical_residual(items) -> float:
    scales = [e.residual_s for s, e in items if e.fit.ok and s.status == "ok" and math.isfinite(e.residual_s)]
    return float(np.median(scales)) if scales else float("nan")


def _outside_px(x: float, y: float, shape) -> float:
    """Distance (px) of a point outside the field (0 inside)."""
    h, w = shape
    return math.hypot(max(-0.5 - x, 0.0, x - (w - 0.5)), max(-0.5 - y, 0.0, y - (h - 0.5)))


def _inside_px(x: float, y: float, shape) -> float:
    """Distance (px) of a point inside the field to the field's edge."""
    h, w = shape
    return max(min(x + 0.5, w - 0.5 - x, y + 0.5, h - 0.5 - y), 0.0)


def _rejection(sph, ev: Evidence, slope: float, typical: float, interval_s: float, shape) -> str:
    """Why this candidate is not a spherulite, or '' when its evidence holds."""
    rules = heuristics.current()
    fit = ev.fit
    if not fit.ok and ev.in_first_frame:
        return ""  # grew before the record began: no evidence either way, so review, not reject
    if not fit.ok:
        where = "at the edge of the field, " if sph.status == "edge" else ""
        return f"no growing front {where}could be fitted ({fit.reason})"
    outside = _outside_px(fit.x_px, fit.y_px, shape)
    uncertainty = 1.96 * math.hypot(fit.se_x_px, fit.se_y_px)
    if outside > 0 and uncertainty > max(rules.edge_centre_uncertainty * outside, rules.edge_centre_floor_px):
        return (f"enters from outside the field; its centre, {outside:.0f} px out, is uncertain by "
                f"±{uncertainty:.0f} px (the arc seen is too short)")
    inside_margin = _inside_px(fit.x_px, fit.y_px, shape)
    if outside == 0 and uncertainty > rules.edge_centre_floor_px and uncertainty > inside_margin:
        return (f"its centre, {inside_margin:.0f} px inside the edge of the field, is uncertain by "
                f"±{uncertainty:.0f} px: it cannot be placed inside or outside")
    if fit.n_levels < rules.reject_min_levels:
        return f"grows over only {fit.n_levels} frames (at least {rules.reject_min_levels} needed)"
    if sph.status == "nonlinear":
        return ""  # its radius is not linear in time (a ramp, diffusion): the cone's slope is no G
    if math.isfinite(slope) and abs(slope / fit.slope_s_per_px - 1) > rules.reject_max_slope_deviation:
        return (f"grows at {100 * (slope / fit.slope_s_per_px - 1):+.0f} % of the field's growth rate: "
                "not a spherulite at this temperature (dust, a bubble or noise)")
    floor = max(typical, 0.25 * interval_s) if math.isfinite(typical) else 0.25 * interval_s
    short_lived = fit.n_levels < 2 * rules.reject_min_levels
    if short_lived and ev.residual_s > rules.reject_residual_ratio * floor:
        return (f"its pixels do not follow one growing front (residuals {ev.residual_s / floor:.1f}× "
                "the field's typical)")
    return ""


def _phantom_check(k, sph, ev: Evidence, items, interval_s: float):
    """A nucleus cannot be born inside crystal (the phantom nuclei of Avrami 1939, J.
    Chem. Phys. 7, 1103), and one born as another front arrives cannot be told from that
    front: when another detection's fitted front reaches this one's centre less than
    ``phantom_margin_intervals`` frame intervals after its fitted nucleation time, its
    'cone' is the seam where fronts met, not a nucleus."""
    fit = ev.fit
    if not fit.ok or sph.status in ("rejected", "nonlinear") or not ev.automatic or ev.user_included:
        return sph
    margin = heuristics.current().phantom_margin_intervals * interval_s
    for j, (other, oe) in enumerate(items):
        if j == k or not oe.fit.ok or other.status in ("rejected", "nonlinear"):
            continue
        reached = oe.fit.t0_s + oe.fit.slope_s_per_px * math.hypot(fit.x_px - oe.fit.x_px, fit.y_px - oe.fit.y_px)
        if reached < fit.t0_s + margin:
            return dataclasses.replace(sph, status="rejected", reason=(
                f"#{other.id}'s front reached its centre {reached - fit.t0_s:+.0f} s from its nucleation "
                "time: a seam between fronts, not a nucleus"))
    return sph


def _duplicates(items, interval_s: float, noise_s: float = float("nan"),
                correlation_px: float = 0.0) -> dict[int, int]:
    """{id: id of the stronger twin} for fitted detections describing the same front
    (``noise_s``, ``correlation_px``: see :func:`_one_front`)."""
    rules = heuristics.current()
    fitted = [(s, e) for s, e in items if e.fit.ok and s.status != "rejected" and e.x.size]
    twin = {}
    for i, (a, ea) in enumerate(fitted):
        for b, eb in fitted[i + 1:]:
            # Their centres must agree within the uncertainty of the two fits (95 %).
            apart = math.hypot(ea.fit.x_px - eb.fit.x_px, ea.fit.y_px - eb.fit.y_px)
            spread = 1.96 * math.sqrt(ea.fit.se_x_px ** 2 + ea.fit.se_y_px ** 2 + eb.fit.se_x_px ** 2 +
                                      eb.fit.se_y_px ** 2)
            if apart > max(spread, rules.same_centre_px):
                continue
            if _one_front(ea, eb, interval_s, rules.duplicate_agreement_intervals, noise_s, correlation_px):
                weak, strong = (a, b) if ea.x.size < eb.x.size else (b, a)
                if weak.id not in twin and not (weak is a and ea.user_included or weak is b and eb.user_included):
                    twin[weak.id] = strong.id
    return twin


def _one_front(ea: Evidence, eb: Evidence, interval_s: float, agreement: float,
               noise_s: float = float("nan"), correlation_px: float = 0.0) -> bool:
    """One cone fitted to both detections' pixels explains them as well as their own
    cones do (robust residual scale within a quarter of ``agreement`` frame intervals of
    the worse of the two, and the same growth rate within 10 %): the two are pieces of
    one front, typically an arc entering the field split by its extinction arms. Only
    asked of pairs whose centres agree within their uncertainty (see _duplicates).

    Not one front when the two cones are strongly preferred on the model comparison
    with the field's arrival-time noise ``noise_s`` (nuclei.pair_evidence above
    ``split_evidence_bic``): a close pair of nuclei, whose joint cone is only a little
    worse pixel by pixel but over every pixel."""
    x, y, t = (np.concatenate([a, b]) for a, b in ((ea.x, eb.x), (ea.y, eb.y), (ea.t, eb.t)))
    strong = ea if ea.x.size >= eb.x.size else eb
    levels = np.round(t / interval_s).astype(np.int64)
    joint = growth.fit_cone(x, y, t, levels, start_xy=(strong.fit.x_px, strong.fit.y_px), f_scale_s=0.5 * interval_s,
                            start_t0_slope=(strong.fit.t0_s, strong.fit.slope_s_per_px))
    if not joint.ok:
        return False
    scale = growth.residual_scale_s(joint, x, y, t)
    worse = max(ea.residual_s, eb.residual_s)
    if scale > worse + 0.25 * agreement * interval_s or \
            abs(joint.slope_s_per_px / strong.fit.slope_s_per_px - 1) > 0.1:
        return False
    if not math.isfinite(noise_s):
        return True
    f_scale = 0.5 * interval_s
    own = sum(growth.soft_l1_cost(growth.cone_residuals(e.fit, e.x, e.y, e.t), f_scale) for e in (ea, eb))
    shared = growth.soft_l1_cost(growth.cone_residuals(joint, x, y, t), f_scale)
    return nuclei.pair_evidence(shared, own, noise_s=noise_s, n_pixels=x.size,
                                correlation_px=correlation_px) <= heuristics.current().split_evidence_bic


def confidence(sph, ev: Evidence, *, slope: float, typical: float, interval_s: float,
               nearest_px: float, shape) -> float:
    """Confidence in [0, 1] that a detection is one real spherulite, from its evidence.

    The product of: frames of growth 1 − exp(−levels / 5); residuals min(1, typical /
    residual); growth-rate agreement exp(−(deviation / 0.15)²); nucleation-time precision
    exp(−se(t0) / interval); closeness to another nucleus min(1, distance / 10 px); 0.7
    when the centre lies outside the field (an arc locates its centre less well).
    """
    fit = ev.fit
    if sph.status == "rejected" or not fit.ok:
        return 0.0
    value = 1.0 - math.exp(-fit.n_levels / 5.0)
    if math.isfinite(typical) and ev.residual_s > 0:
        value *= min(1.0, typical / ev.residual_s)
    if math.isfinite(slope):
        value *= math.exp(-((fit.slope_s_per_px / slope - 1) / 0.15) ** 2)
    if math.isfinite(fit.se_t0_s):
        value *= math.exp(-fit.se_t0_s / interval_s)
    value *= min(1.0, nearest_px / 10.0)
    h, w = shape
    if not (-0.5 <= fit.x_px <= w - 0.5 and -0.5 <= fit.y_px <= h - 0.5):
        value *= 0.7
    return float(np.clip(value, 0.0, 1.0))


def judge(spherulites, evidence, *, interval_s: float, shape, correlation_px: float = 0.0):
    """The spherulites with evidence-based rejections (status ``rejected`` and a reason)
    and a confidence each; ``evidence`` is one :class:`Evidence` per spherulite;
    ``correlation_px``: Gaussian sigma (px) shared by neighbouring arrival times."""
    items = list(zip(spherulites, evidence))
    slope, typical = _field_slope(items), _typical_residual(items)
    judged = []
    for sph, ev in items:
        reason = "" if ev.user_included or not ev.automatic or sph.status == "excluded" else \
            _rejection(sph, ev, slope, typical, interval_s, shape)
        judged.append(dataclasses.replace(sph, status="rejected", reason=reason) if reason else sph)
    items = list(zip(judged, evidence))
    judged = [_phantom_check(k, s, e, items, interval_s) for k, (s, e) in enumerate(items)]
    items = list(zip(judged, evidence))
    twins = _duplicates(items, interval_s, typical, correlation_px)
    judged = [dataclasses.replace(s, status="rejected", reason=f"the same growing front as #{twins[s.id]}")
              if s.id in twins and e.automatic else s for s, e in items]
    centres = np.array([[s.x_px, s.y_px] for s in judged]).reshape(-1, 2)
    out = []
    for k, (sph, ev) in enumerate(zip(judged, evidence)):
        others = np.delete(centres, k, axis=0)
        live = np.array([o.status != "rejected" for j, o in enumerate(judged) if j != k], bool)
        gaps = np.hypot(*(others[live] - centres[k]).T) if live.any() else np.array([np.inf])
        score = confidence(sph, ev, slope=slope, typical=typical, interval_s=interval_s,
                           nearest_px=float(gaps.min()), shape=shape)
        out.append(dataclasses.replace(sph, confidence=score))
    return out


def best_frame(sph, times_s, isothermal_start_s: float, nearest_px: float, slope_s_per_px: float) -> int:
    """Frame in which a detection is best judged: its front half-way to the nearest other
    nucleus (large enough to see, not yet impinged); the first frame it is seen without a fit."""
    times = np.asarray(times_s, float)
    if sph.nucleation_time_s is None or not math.isfinite(slope_s_per_px):
        seen = sph.first_seen_s if sph.first_seen_s is not None else 0.0
        target = seen + isothermal_start_s
    else:
        reach = 0.5 * (nearest_px if math.isfinite(nearest_px) else 40.0)
        target = sph.nucleation_time_s + isothermal_start_s + max(reach, 5.0) * slope_s_per_px
    return int(np.clip(np.searchsorted(times, target), 0, times.size - 1))


def review_order(spherulites, *, include_rejected: bool = False) -> list[int]:
    """Ids of the detections worth a second look, least confident first: every one below
    ``doubtful_confidence`` (and, on request, the rejected candidates after them, so a
    real spherulite the analysis turned down can be promoted)."""
    limit = heuristics.current().doubtful_confidence
    doubtful = [s for s in spherulites if s.status != "rejected" and s.status != "excluded"
                and (s.confidence is None or s.confidence < limit)]
    doubtful.sort(key=lambda s: (s.confidence if s.confidence is not None else -1.0, s.id))
    ids = [s.id for s in doubtful]
    if include_rejected:
        ids += [s.id for s in spherulites if s.status == "rejected"]
    return ids


def nearest_other_px(spherulites, spherulite_id: int) -> float:
    """Distance (px) from one detection's centre to the nearest other non-rejected one."""
    me = next(s for s in spherulites if s.id == spherulite_id)
    gaps = [math.hypot(s.x_px - me.x_px, s.y_px - me.y_px) for s in spherulites
            if s.id != spherulite_id and s.status != "rejected"]
    return min(gaps) if gaps else float("inf")
