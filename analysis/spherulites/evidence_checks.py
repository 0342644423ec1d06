"""Never more nuclei than the evidence supports: rejection with a reason, and confidence.

A candidate (a minimum of the arrival map, a region that crystallised early, one half of
a split) is a spherulite only when its pixels show one front growing at the field's
rate. After the cone fits, each automatic candidate is checked against that evidence
(thresholds in :mod:`analysis.heuristics`); one that fails becomes ``rejected`` with the
reason in words. Whether a candidate is a nucleus or the seam where other fronts met is a
model comparison (:func:`nucleus_support`): do its arrival times need a cone of its own,
or do the neighbouring fronts explain them? Rejected rows are kept (the viewer lists them on request and one
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
from scipy import optimize

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


def field_slope(items) -> float:
    """Median fitted slope (s/px, 1/G) of the ``ok`` (spherulite, evidence) pairs; nan without any."""
    slopes = [e.fit.slope_s_per_px for s, e in items if e.fit.ok and s.status == "ok"]
    return float(np.median(slopes)) if slopes else float("nan")


def typical_residual(items) -> float:
    """Median robust residual scale (s) of the ``ok`` (spherulite, evidence) pairs' fits; nan without any."""
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
    needed = rules.reject_min_levels - (1 if fit.slope_held else 0)  # one parameter fewer
    if fit.n_levels < needed:
        return f"grows over only {fit.n_levels} frames (at least {needed} needed)"
    if sph.status == "nonlinear":
        return ""  # its radius is not linear in time (a ramp, diffusion): the cone's slope is no G
    if math.isfinite(slope) and abs(slope / fit.slope_s_per_px - 1) > rules.reject_max_slope_deviation:
        return (f"grows at {100 * (slope / fit.slope_s_per_px - 1):+.0f} % of the field's growth rate: "
                "not a spherulite at this temperature (dust, a bubble or noise)")
    short_lived = fit.n_levels < 2 * rules.reject_min_levels
    if short_lived and not follows_one_front(ev, typical, interval_s):
        return (f"its pixels do not follow one growing front (residuals "
                f"{ev.residual_s / _residual_floor(typical, interval_s):.1f}× the field's typical)")
    return ""


def _residual_floor(typical: float, interval_s: float) -> float:
    return max(typical, 0.25 * interval_s) if math.isfinite(typical) else 0.25 * interval_s


def follows_one_front(ev: Evidence, typical: float, interval_s: float) -> bool:
    """The fit's robust residual scale is within ``reject_residual_ratio`` of the field's
    typical one (at least a quarter frame interval): its pixels follow one growing front."""
    return ev.residual_s <= heuristics.current().reject_residual_ratio * _residual_floor(typical, interval_s)


def arrival_noise_s(typical_s: float, interval_s: float) -> float:
    """Standard deviation of one measured arrival time about its front, s: the field's
    typical robust residual scale, or without fits the spread of a time known only to
    its frame interval, interval / sqrt(12) (uniform quantisation; Widrow & Kollar 2008,
    Quantization Noise, Cambridge University Press)."""
    return typical_s if math.isfinite(typical_s) and typical_s > 0 else interval_s / math.sqrt(12.0)


def _cone_table(cones: list) -> np.ndarray:
    """(n, 4) array of the cones' x, y (px), t0 (s) and slope (s/px)."""
    return np.array([[c.x_px, c.y_px, c.t0_s, c.slope_s_per_px] for c in cones], float).reshape(-1, 4)


def _competing(fit: growth.ConeFit, reach_px: float, table: np.ndarray) -> np.ndarray:
    """Indices of the cones (rows of a :func:`_cone_table`) that can arrive first somewhere
    within ``reach_px`` of ``fit``'s centre: a cone whose earliest possible arrival there
    is later than another cone's latest can never be the first front (exact pruning)."""
    if table.shape[0] == 0:
        return np.zeros(0, int)
    gap = np.hypot(table[:, 0] - fit.x_px, table[:, 1] - fit.y_px)
    earliest = table[:, 2] + table[:, 3] * np.maximum(gap - reach_px, 0.0)
    latest = table[:, 2] + table[:, 3] * (gap + reach_px)
    return np.flatnonzero(earliest <= latest.min())


def _reach_px(ev: Evidence) -> float:
    return float(np.max(np.hypot(ev.x - ev.fit.x_px, ev.y - ev.fit.y_px))) if ev.x.size else 0.0


def _prediction_se_s(fit: growth.ConeFit, x: float, y: float) -> float:
    """Standard error (s) of a fitted cone's arrival time at (x, y) from the standard
    errors of its t0, slope and centre, taken as independent (t0 and slope are
    anticorrelated, so this is an upper bound)."""
    d = math.hypot(x - fit.x_px, y - fit.y_px)
    centre = fit.slope_s_per_px * math.hypot(fit.se_x_px, fit.se_y_px)
    terms = [fit.se_t0_s, d * fit.se_slope_s_per_px, centre]
    return math.sqrt(sum(v * v for v in terms if math.isfinite(v)))


def _offset_cost(model_s: np.ndarray, own_s: np.ndarray | None, t: np.ndarray, noise_s: float,
                 per_frame: float, prior_s: float) -> float:
    """-2 log-likelihood of arrival times ``t`` under the other fronts ``model_s`` (and,
    when given, a cone of its own, ``own_s``), the fronts' common timing offset b
    profiled out under its Gaussian prior of standard deviation ``prior_s`` (their fits'
    uncertainty): min over b of the scaled soft-L1 cost plus (b / prior)²."""
    def cost(b):
        arrival = model_s + b if own_s is None else np.minimum(model_s + b, own_s)
        penalty = (b / prior_s) ** 2 if b else 0.0
        return 2.0 * growth.soft_l1_cost(arrival - t, noise_s) / noise_s ** 2 * per_frame + penalty
    if not prior_s > 0:
        return cost(0.0)
    # Searched within four prior standard deviations: a larger shift of fitted fronts is implausible.
    best = optimize.minimize_scalar(cost, bounds=(-4.0 * prior_s, 4.0 * prior_s), method="bounded",
                                    options={"xatol": 0.01 * noise_s})
    return float(min(best.fun, cost(0.0)))


def nucleus_support(ev: Evidence, others: list, noise_s: float) -> float:
    """Evidence for a nucleus of its own: the drop of the Bayesian information criterion
    (Schwarz 1978, Ann. Stat. 6, 461) when this candidate's cone joins the other fronts.

    Model 0: its pixels are reached first by the other fitted cones (Johnson-Mehl,
    t = min over them), as on a seam where their fronts met. Model 1: the same plus its
    own cone. -2 log-likelihood is the soft-L1 cost of the residuals in units of the
    arrival noise ``noise_s`` (Gaussian at small residuals, robust to stray pixels);
    pixels of one frame share that frame's timing error, so each frame counts as one
    observation (the cost is scaled by frames / pixels, as the fit's errors are). The
    other fronts are placed only as well as their fits allow: in both models they may
    arrive earlier or later by a common offset, penalised by its prior (the standard
    error of their predicted arrival at this candidate's centre). Model 1 has the cone's
    parameters more (4, or 3 with the slope held at the field's), each costing
    ln(frames). Positive: the data need the extra nucleus; a seam, a phantom born inside
    crystal (Avrami 1939, J. Chem. Phys. 7, 1103) or a second piece of a known front
    scores about zero or below. Without other fronts, +inf.
    """
    fit, x, y, t = ev.fit, ev.x, ev.y, ev.t
    rivals = [others[i] for i in _competing(fit, _reach_px(ev), _cone_table(others))]
    if not rivals or x.size == 0:
        return math.inf
    arrivals = np.array([growth.cone_arrival_s(o, x, y) for o in rivals])
    first = np.argmin(arrivals, axis=0)
    fronts = arrivals[first, np.arange(x.size)]
    spread = np.array([_prediction_se_s(o, fit.x_px, fit.y_px) for o in rivals])
    prior = float(np.sqrt(np.mean(spread[first] ** 2)))
    per_frame = fit.n_levels / x.size
    own = growth.cone_arrival_s(fit, x, y)
    gain = _offset_cost(fronts, None, t, noise_s, per_frame, prior) - \
        _offset_cost(fronts, own, t, noise_s, per_frame, prior)
    n_params = fit.n_levels - fit.dof
    return gain - n_params * math.log(fit.n_levels)


def _seam_check(judged: list, evidence: list, noise_s: float) -> list:
    """Reject the automatic candidates whose pixels the other fronts explain as well
    (:func:`nucleus_support` not positive): one pass, weakest candidate (fewest fitted
    pixels) first, each compared with the fronts still standing, so of two pieces of one
    front the weaker goes and the stronger stays."""
    out = list(judged)

    def standing(s, e):
        return e.fit.ok and s.status not in ("rejected", "nonlinear")

    table = _cone_table([e.fit for e in evidence])
    alive = np.array([standing(s, e) for s, e in zip(out, evidence)], bool)
    order = sorted(range(len(out)), key=lambda k: (evidence[k].x.size, out[k].id))
    for k in order:
        sph, ev = out[k], evidence[k]
        if not alive[k] or not ev.automatic or ev.user_included:
            continue
        others = np.flatnonzero(alive)
        others = others[others != k]
        near = others[_competing(ev.fit, _reach_px(ev), table[others])]  # the same rivals, found once
        support = nucleus_support(ev, [evidence[j].fit for j in near], noise_s)
        if support <= 0:
            out[k] = dataclasses.replace(sph, status="rejected", reason=(
                "the neighbouring fronts explain its arrival times as well as a nucleus of its own "
                f"(information criterion {support:+.1f}): a seam between fronts or a piece of another front"))
            alive[k] = False
    return out


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
    slope, typical = field_slope(items), typical_residual(items)
    judged = []
    for sph, ev in items:
        reason = "" if ev.user_included or not ev.automatic or sph.status == "excluded" else \
            _rejection(sph, ev, slope, typical, interval_s, shape)
        judged.append(dataclasses.replace(sph, status="rejected", reason=reason) if reason else sph)
    judged = _seam_check(judged, evidence, arrival_noise_s(typical, interval_s))
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
