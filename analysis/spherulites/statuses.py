"""Spherulite statuses: each defined once, with the threshold that decides it and the
reason it gives, so a status never contradicts the numbers shown beside it.

:data:`STATUSES` is the table the analysis, the exports, the Details panel, the viewer's
legend and Help all read; adding a status is one entry there plus its rule in
:func:`classify`. The thresholds are the analysis settings named in each entry
(``analysis.spherulites.pipeline.AnalysisSettings``).

Besides its status a spherulite can carry a *note*: nucleation before the isothermal
start (the fitted t0 is negative beyond its 95 % confidence interval) means the nucleus
formed while the sample was still cooling to Tc, so its time and count are not those of
the isothermal experiment.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy import special


@dataclass(frozen=True)
class Status:
    """One status: its name, what it means, and whether its G enters the pooled rate."""

    name: str
    meaning: str
    threshold: str  # the setting(s) that decide it, in words
    pooled: bool = False


STATUSES: dict[str, Status] = {s.name: s for s in (
    Status("ok", "a clean growth fit: its G enters the pooled growth rate", "", pooled=True),
    Status("edge", "nucleated outside the field of view (fitted centre outside the image, or a "
           "marker on the border without a fit): its centre and t0 are extrapolated, so it "
           "enters neither the pooled G nor the nucleation count", "the image border"),
    Status("few-points", "too little free growth for a rate of its own: fewer radii measured "
           "while the front still grew freely than the minimum, a cone fitted at the field's "
           "growth rate (too few frames to measure its own), or no cone fit at all",
           "min_points radii with at least min_free_fraction of the directions free"),
    Status("nonlinear", "its radius does not grow linearly in time: the quadratic term of r(t) "
           "is significant and the slope changes by more than the minimum over the record",
           "nonlinear_alpha (F-test) and nonlinear_min_change (relative slope change)"),
    Status("excluded", "left out of the statistics by you (Exclude tool)", "your edit"),
    Status("rejected", "a candidate without the evidence of a growing spherulite (no cone, too "
           "few frames, a growth rate or residuals unlike those of the field, a centre that cannot be "
           "placed, a seam between fronts, a second piece of another front): listed only on "
           "request, counted nowhere; Include promotes it",
           "the evidence checks of analysis.spherulites.evidence_checks (analysis.heuristics)"),
)}


@dataclass(frozen=True)
class Verdict:
    status: str
    reason: str  # why, with the numbers that decided it ("" for a plain ok)


def classify(*, excluded: bool | None, fit_ok: bool, fit_reason: str, marker_on_border: bool,
             centre_inside: bool, user_centre: bool, free_radii: int, min_points: int,
             min_free_fraction: float, nonlinear: bool, linearity: str) -> Verdict:
    """The status of one spherulite from the numbers that decide it.

    ``excluded``: the user's choice (True: excluded, False: included, None: no choice);
    ``free_radii``: radii of at least 3 px measured with at least ``min_free_fraction``
    of the directions still growing freely (``RadiusSeries.n_used``); ``linearity``: the
    non-linearity test's own description.
    """
    if excluded:
        return Verdict("excluded", "excluded by you")
    if not fit_ok:
        if marker_on_border:
            return Verdict("edge", f"marker on the image border and no cone fit ({fit_reason})")
        return Verdict("few-points", f"no cone fit: {fit_reason}")
    if excluded is False:
        return Verdict("ok", "included by you")
    if not centre_inside and not user_centre:
        return Verdict("edge", "fitted centre outside the image")
    if free_radii < min_points:
        return Verdict("few-points", f"{free_radii} free-growth radii (radius ≥ 3 px with ≥ "
                                     f"{min_free_fraction:.0%} of the directions free; needs "
                                     f"{min_points})")
    if nonlinear:
        return Verdict("nonlinear", linearity)
    return Verdict("ok", "")


def early_nucleation_note(t0_s: float | None, se_t0_s: float | None, dof: int) -> str:
    """A note when the nucleus formed before the isothermal start beyond its 95 % CI.

    ``t0_s`` is counted from the isothermal start; ``se_t0_s`` its standard error with
    ``dof`` degrees of freedom (t quantile). Empty when not the case or unknown.
    """
    if t0_s is None or se_t0_s is None or dof < 1 or not math.isfinite(se_t0_s):
        return ""
    half = float(special.stdtrit(dof, 0.975)) * se_t0_s
    if t0_s + half >= 0.0:
        return ""
    return (f"nucleated before the isothermal start: t0 = {t0_s:.0f} ± {half:.1g} s (95 % CI), "
            "while the sample was still cooling to Tc")


def with_note(reason: str, note: str) -> str:
    """A reason and a note in one line."""
    return "; ".join(part for part in (reason, note) if part)
