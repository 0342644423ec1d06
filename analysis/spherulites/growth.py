"""Growth fits: the arrival-time cone of each territory, linearity, and the pooled rate.

Inside its territory a spherulite growing at a constant radial rate G from a nucleus at
c born at t0 is reached at t(p) = t0 + |p - c| / G (Johnson & Mehl 1939, Trans. AIME 135,
416). A robust least-squares fit of this cone over the territory's pixels gives the
sub-pixel centre, the back-extrapolated nucleation time and G, and it is unaffected by
extinction wedges or any other part of the front that the images do not show.

Units: positions in px, times in s, the fitted slope as s per px; conversions to
um/min happen in :func:`growth_rate_um_per_min`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special, stats


@dataclass(frozen=True)
class ConeFit:
    """Result of one cone fit (all uncertainties already inflated, see :func:`fit_cone`).

    ``slope_s_per_px`` is 1/G (not measured when ``slope_held``). ``n_levels`` is the effective sample size (number of
    distinct frames among the fitted pixels) used for the confidence intervals.
    ``ok`` is False when the fit could not be made; ``reason`` then says why.
    """

    x_px: float
    y_px: float
    t0_s: float
    slope_s_per_px: float
    se_x_px: float
    se_y_px: float
    se_t0_s: float
    se_slope_s_per_px: float
    dof: int
    r2: float
    n_pixels: int
    n_levels: int
    ok: bool = True
    reason: str = ""
    slope_held: bool = False  # the slope was held at a given value (the field's), not fitted

    @property
    def g_px_per_s(self) -> float:
        return 1.0 / self.slope_s_per_px

    def g_ci95_px_per_s(self) -> float | None:
        """95 % half-width of G (t-quantile with ``dof`` degrees of freedom), px/s."""
        if not self.ok or self.dof < 1 or not np.isfinite(self.se_slope_s_per_px):
            return None
        se_g = self.se_slope_s_per_px / self.slope_s_per_px ** 2
        return float(special.stdtrit(self.dof, 0.975) * se_g)  # t quantile, cheaper than stats.t


def failed_fit(reason: str, n_pixels: int = 0, n_levels: int = 0) -> ConeFit:
    nan = float("nan")
    return ConeFit(nan, nan, nan, nan, nan, nan, nan, nan, 0, nan, n_pixels, n_levels,
                   ok=False, reason=reason)


def growth_rate_um_per_min(g_px_per_s: float | None, um_per_px: float) -> float | None:
    """Convert px/s to um/min (None passes through)."""
    return None if g_px_per_s is None else float(g_px_per_s) * um_per_px * 60.0


def model_arrival_map(shape: tuple[int, int], centres_xy, t0_s, g_px_per_s) -> np.ndarray:
    """Johnson-Mehl arrival map min_i(t0_i + |p - c_i| / G_i) on a pixel grid, s.

    The fitted model of a whole field: shows where the fits put every front, including
    behind extinction wedges. ``+inf`` where there is no nucleus at all.
    """
    yy, xx = np.mgrid[: shape[0], : shape[1]]
    out = np.full(shape, np.inf)
    g_all = np.broadcast_to(np.asarray(g_px_per_s, dtype=float), (len(t0_s),))
    for (cx, cy), t0, g in zip(np.asarray(centres_xy, float).reshape(-1, 2), t0_s, g_all):
        np.minimum(out, t0 + np.hypot(xx - cx, yy - cy) / g, out=out)
    return out


def dequantised(arrival_s: np.ndarray, times_s: np.ndarray) -> np.ndarray:
    """Arrival times moved from frame times to the middle of their frame interval.

    A pixel first seen crystalline in frame f was reached some time in (t_{f-1}, t_f]; when
    the map holds exactly frame times (at least 90 % of its finite values), the midpoint
    is the unbiased estimate and removes a bias of half an interval from every t0. Maps
    interpolated between frames pass unchanged.
    """
    arrival = np.asarray(arrival_s, dtype=np.float64)
    times = np.asarray(times_s, dtype=np.float64)
    finite = np.isfinite(arrival)
    values = arrival[finite]
    if values.size == 0 or times.size < 2:
        return arrival.copy()
    idx = np.clip(np.searchsorted(times, values), 0, times.size - 1)
    tol = 1e-6 * max(1.0, float(np.abs(times).max()))
    on_frame = np.abs(times[idx] - values) <= tol
    if on_frame.mean() < 0.9:
        return arrival.copy()
    previous = np.where(idx > 0, times[np.maximum(idx - 1, 0)], times[0])
    shifted = np.where(on_frame & (idx > 0), 0.5 * (previous + times[idx]), values)
    out = arrival.copy()
    out[finite] = shifted
    return out


def _residuals(p, x, y, t):
    return p[2] + p[3] * np.hypot(x - p[0], y - p[1]) - t


def _jacobian(p, x, y, t):
    dx, dy = x - p[0], y - p[1]
    r = np.maximum(np.hypot(dx, dy), 1e-9)
    return np.column_stack([-p[3] * dx / r, -p[3] * dy / r, np.ones_like(r), r])


def _linear_start(x, y, t, cx, cy) -> tuple[float, float]:
    r = np.hypot(x - cx, y - cy)
    if np.ptp(r) <= 0:
        return float(np.min(t)), 1.0
    slope, intercept = np.polyfit(r, t, 1)
    return float(intercept), float(max(slope, 1e-6))


def _covariance(jac: np.ndarray, resid: np.ndarray, n_params: int) -> np.ndarray:
    n = resid.size
    sigma2 = float(resid @ resid) / max(n - n_params, 1)
    try:
        return np.linalg.inv(jac.T @ jac) * sigma2
    except np.linalg.LinAlgError:
        return np.full((n_params, n_params), np.nan)


def fit_cone(x, y, t, levels, *, start_xy, f_scale_s: float, fixed_centre: bool = False,
             field_shape: tuple[int, int] | None = None,
             start_t0_slope: tuple[float, float] | None = None,
             held_slope_s_per_px: float | None = None) -> ConeFit:
    """Robust least-squares fit of t = t0 + s |p - c| over one territory's pixels.

    Parameters
    ----------
    x, y, t : arrays
        Pixel columns, rows (px) and arrival times (s).
    levels : array of int
        Frame index of each pixel; the number of distinct values is the effective sample
        size.
    start_xy : (float, float)
        Starting centre (the marker), or the imposed centre when ``fixed_centre``.
    f_scale_s : float
        Residual scale of the soft-L1 loss, s (about half a frame interval): residuals
        beyond it (noise, a neighbour's pixels at the boundary) are down-weighted.
    fixed_centre : bool
        Fit only t0 and s with the centre held at ``start_xy`` (user-moved centre).
    field_shape : (H, W), optional
        A fitted centre more than one field size outside the field is a failed fit.
    start_t0_slope : (float, float), optional
        Starting t0 (s) and slope (s/px), e.g. from an earlier fit of nearly the same
        pixels (fewer iterations); by default a straight line of t against the distance
        from ``start_xy``.
    held_slope_s_per_px : float, optional
        Fit only the centre and t0 with the slope held at this value, s/px: all
        spherulites of an isothermal field grow at one rate, so a nucleus with too few
        frames of its own to measure G is still located and timed (three parameters).
        Not with ``fixed_centre``.

    Notes
    -----
    Standard errors come from the Jacobian scaled by the residual variance. Neighbouring
    pixels share a frame and so share that frame's segmentation error (threshold,
    flicker): they are not independent. The errors are therefore inflated by
    sqrt(n_pixels / n_levels), i.e. each frame counts as one observation, and the
    t-quantile uses n_levels - n_params degrees of freedom. Coverage of the resulting
    95 % interval is checked in tests/benchmarks/accuracy.py.
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x, y, t))
    n_levels = int(np.unique(levels).size)
    held = held_slope_s_per_px
    if held is not None and fixed_centre:
        raise ValueError("a cone with both its centre and its slope held has only t0 to fit")
    n_params = 2 if fixed_centre else 3 if held is not None else 4
    if t.size < 3 * n_params or n_levels < n_params + 1:
        return failed_fit(f"{n_levels} frames of data are too few for a cone fit", t.size, n_levels)
    cx, cy = start_xy
    t0, s = _linear_start(x, y, t, cx, cy) if start_t0_slope is None else start_t0_slope
    if fixed_centre:
        q = _soft_l1_minimum(_cone_problem(x, y, t, (cx, cy)), np.array([t0, s]), f_scale_s)
        p = np.array([cx, cy, *q])
        jac = _jacobian(p, x, y, t)[:, 2:]
    elif held is not None:
        lo, hi = _centre_bounds(field_shape)
        start = np.median(t - held * np.hypot(x - cx, y - cy))
        q = _soft_l1_minimum(_cone_problem(x, y, t, slope=held),
                             np.array([np.clip(cx, lo[0], hi[0]), np.clip(cy, lo[1], hi[1]), start]), f_scale_s)
        p = np.array([*q, held])
        if not (lo[0] <= p[0] <= hi[0] and lo[1] <= p[1] <= hi[1]):
            return failed_fit("cone apex far outside the field", t.size, n_levels)
        jac = _jacobian(p, x, y, t)[:, :3]
    else:
        lo, hi = _centre_bounds(field_shape)
        x0 = np.array([np.clip(cx, lo[0], hi[0]), np.clip(cy, lo[1], hi[1]), t0, s])
        # Unbounded (much cheaper per step); the bounds are checked after.
        p = _soft_l1_minimum(_cone_problem(x, y, t), x0, f_scale_s)
        if not (lo[0] <= p[0] <= hi[0] and lo[1] <= p[1] <= hi[1]):
            return failed_fit("cone apex far outside the field", t.size, n_levels)
        jac = _jacobian(p, x, y, t)
    if p[3] <= 0 or not np.all(np.isfinite(p)):
        return failed_fit("cone fit did not converge to a growing front", t.size, n_levels)
    return _summarise(p, jac, _residuals(p, x, y, t), t, n_levels, n_params, fixed_centre,
                      slope_held=held is not None)


def _cone_problem(x, y, t, centre=None, slope=None):
    """Residuals of the cone (as :func:`_residuals`) with a deferred Jacobian (as
    :func:`_jacobian`) sharing the distances: parameters (x, y, t0, s), (t0, s) around
    a fixed ``centre``, or (x, y, t0) with a held ``slope``."""
    def evaluate(q):
        if centre is not None:
            cx, cy, t0, s = centre[0], centre[1], q[0], q[1]
        elif slope is not None:
            cx, cy, t0, s = q[0], q[1], q[2], slope
        else:
            cx, cy, t0, s = q
        dx, dy = x - cx, y - cy
        dist = np.hypot(dx, dy)
        resid = t0 + s * dist - t

        def jacobian():
            if centre is not None:
                return np.column_stack([np.ones_like(dist), dist])
            safe = np.maximum(dist, 1e-9)
            columns = [-s * dx / safe, -s * dy / safe, np.ones_like(dist)]
            return np.column_stack(columns if slope is not None else columns + [dist])
        return resid, jacobian
    return evaluate


def _soft_l1_minimum(evaluate, p0, f_scale: float, *, max_steps: int = 200,
                     xtol: float = 1e-8, ftol: float = 1e-8) -> np.ndarray:
    """Parameters minimising the soft-L1 cost (see :func:`soft_l1_cost`) of a problem.

    ``evaluate(p)`` returns the residuals at ``p`` and a function that builds their
    Jacobian. Levenberg-Marquardt on the iteratively reweighted normal equations: the
    soft-L1 loss is a concave function of r^2, so weights w = 1 / sqrt(1 + (r/f)^2)
    make a weighted least-squares problem whose minimum lowers the robust cost (Holland
    & Welsch 1977, Commun. Stat. Theory Methods 6, 813; Marquardt 1963, J. SIAM 11,
    431). The same minimum as scipy.optimize.least_squares(loss="soft_l1"), with the
    same tolerances, at a fraction of the cost for these small problems. Only accepted
    steps lower the cost; stops when the step or the relative cost change falls below
    the tolerances.
    """
    p = np.asarray(p0, dtype=float).copy()
    resid, jacobian = evaluate(p)
    root = np.sqrt(1.0 + (resid / f_scale) ** 2)
    cost = f_scale ** 2 * float(np.sum(root - 1.0))
    damping = 1e-3
    for _ in range(max_steps):
        jac = jacobian()
        weighted = jac / root[:, None]
        normal = np.einsum("ij,ik->jk", weighted, jac)
        gradient = np.einsum("ij,i->j", weighted, resid)
        while True:
            try:
                step = np.linalg.solve(normal + damping * np.diag(np.diag(normal) + 1e-12), -gradient)
            except np.linalg.LinAlgError:
                step = None
            if step is not None and np.all(np.isfinite(step)):
                trial_resid, trial_jacobian = evaluate(p + step)
                trial_root = np.sqrt(1.0 + (trial_resid / f_scale) ** 2)
                trial = f_scale ** 2 * float(np.sum(trial_root - 1.0))
                if np.isfinite(trial) and trial <= cost:
                    break
            damping *= 10.0
            if damping > 1e12:
                return p
        p, previous, cost = p + step, cost, trial
        resid, jacobian, root = trial_resid, trial_jacobian, trial_root
        damping = max(damping / 10.0, 1e-12)
        if (np.linalg.norm(step) < xtol * (xtol + np.linalg.norm(p))
                or previous - cost < ftol * max(previous, 1e-300)):
            break
    return p


def _centre_bounds(field_shape):
    if field_shape is None:
        return [-np.inf, -np.inf], [np.inf, np.inf]
    h, w = field_shape
    return [-float(w), -float(h)], [2.0 * w, 2.0 * h]


def _summarise(p, jac, resid, t, n_levels, n_params, fixed_centre, *, slope_held=False) -> ConeFit:
    cov = _covariance(jac, resid, n_params)
    inflate = math.sqrt(max(t.size / n_levels, 1.0))
    se = np.sqrt(np.clip(np.diag(cov), 0, None)) * inflate
    if fixed_centre:
        se = np.concatenate([[0.0, 0.0], se])
    if slope_held:
        se = np.concatenate([se, [np.nan]])  # not measured: no uncertainty of G to report
    ss_tot = float(np.sum((t - t.mean()) ** 2))
    r2 = 1.0 - float(resid @ resid) / ss_tot if ss_tot > 0 else float("nan")
    return ConeFit(float(p[0]), float(p[1]), float(p[2]), float(p[3]), float(se[0]),
                   float(se[1]), float(se[2]), float(se[3]), n_levels - n_params, r2,
                   int(t.size), n_levels, slope_held=slope_held)


@dataclass(frozen=True)
class LinearityTest:
    """Outcome of the test for non-linear growth on one radius series."""

    nonlinear: bool
    p_value: float | None
    slope_change: float | None
    description: str


def linearity_test(time_s, radius_um, *, alpha: float = 0.01,
                   min_slope_change: float = 0.10) -> LinearityTest:
    """Is r(t) curved? Quadratic against straight line by an extra-sum-of-squares F-test.

    The straight line r = a + b t is nested in r = a + b t + c t^2. The F statistic
    F = (SS_lin - SS_quad) / (SS_quad / (m - 3)) with (1, m - 3) degrees of freedom tests
    c = 0 (Draper & Smith 1998, Applied Regression Analysis, 3rd ed., Wiley, ch. 6).
    Growth is called non-linear when p < ``alpha`` AND the fitted slope changes by more
    than ``min_slope_change`` (relative) across the fitted time span, so that a
    statistically detectable but physically negligible curvature of a long, precise series
    does not reject a good spherulite. Diffusion-limited growth (r proportional to the
    square root of time) shows up as a falling slope.
    """
    t = np.asarray(time_s, dtype=float)
    r = np.asarray(radius_um, dtype=float)
    m = t.size
    if m < 6:
        return LinearityTest(False, None, None, f"not tested: {m} radii (need 6)")
    tc = t - t.mean()
    lin = np.polyfit(tc, r, 1)
    quad = np.polyfit(tc, r, 2)
    ss_lin = float(np.sum((r - np.polyval(lin, tc)) ** 2))
    ss_quad = float(np.sum((r - np.polyval(quad, tc)) ** 2))
    if ss_quad <= 0 or lin[0] <= 0:
        return LinearityTest(False, None, None, "not tested: degenerate radius series")
    f_stat = (ss_lin - ss_quad) / (ss_quad / (m - 3))
    p = float(special.fdtrc(1, m - 3, f_stat))  # F survival function (as stats.f.sf)
    change = float(abs(2.0 * quad[0] * np.ptp(t)) / lin[0])
    nonlinear = p < alpha and change > min_slope_change
    text = (f"quadratic vs linear F-test p = {p:.3g}; slope changes by {change:.0%} over the "
            f"series ({'non-linear' if nonlinear else 'linear'} at p < {alpha} and > "
            f"{min_slope_change:.0%})")
    return LinearityTest(nonlinear, p, change, text)


@dataclass(frozen=True)
class PooledRate:
    value: float | None
    ci95_half_width: float | None
    n: int
    tau2: float | None
    description: str
    statistical_half_width: float | None = None  # the random-effects part alone
    systematic_rel: float = 0.0  # relative standard uncertainty common to all spherulites


#: Residual error of the sub-frame interpolation of arrival times, as a fraction of one
#: frame interval, shared by all spherulites of a recording, and residual error of the
#: drift registration, px. Both set on simulated recordings with seeds 0-99 so that the
#: pooled interval covers the true G 95 % of the time (tests/benchmarks/coverage.py;
#: README "Uncertainty"); a real clock or stage may do worse. The interpolation part was
#: 0.035 until the close-pair and slow-front changes removed the detection errors it had
#: absorbed (coverage 100 % on seeds 0-99 with it; 0.02 gave 98 %, 0.015 91 %).
INTERPOLATION_FRACTION = 0.0175
REGISTRATION_PX = 0.03


@dataclass(frozen=True)
class TimingSystematic:
    """Relative standard uncertainties of G that every spherulite of a recording shares.

    A timing error common to the whole recording moves every cone fit the same way, so
    it does not show in the between-spherulite scatter and must be added (JCGM 100:2008,
    GUM 5.1.2: independent components in quadrature).
    """

    frame_timing: float
    interpolation: float
    registration: float

    @property
    def total(self) -> float:
        return math.sqrt(self.frame_timing ** 2 + self.interpolation ** 2 + self.registration ** 2)


def timing_systematic(times_s, growth_span_s: float, growth_px_per_s: float | None,
                      registered_drift_px: float) -> TimingSystematic:
    """The three shared timing components of the relative uncertainty of G.

    ``growth_span_s`` is the typical time over which a spherulite's growth is measured
    (median over the fitted spherulites); a time error dt that differs between the
    start and the end of that span changes G by dt / span.

    * frame timing: irregularity of the frame times (standard deviation of the frame
      intervals; 0 for a regular clock), acting at both ends of the span;
    * sub-frame interpolation: :data:`INTERPOLATION_FRACTION` of a frame interval;
    * drift registration: :data:`REGISTRATION_PX` of position error over the span, when
      the registration found drift at all (more than 0.05 px).
    """
    t = np.asarray(times_s, dtype=float)
    steps = np.diff(t)
    span = max(float(growth_span_s), float(np.median(steps)) if steps.size else 1.0, 1e-9)
    interval = float(np.median(steps)) if steps.size else 0.0
    jitter = float(np.std(steps)) if steps.size > 2 else 0.0
    frame = math.sqrt(2.0) * jitter / span
    interp = INTERPOLATION_FRACTION * interval / span
    reg = 0.0
    if registered_drift_px > 0.05 and growth_px_per_s and growth_px_per_s > 0:
        reg = REGISTRATION_PX / (growth_px_per_s * span)
    return TimingSystematic(frame, interp, reg)


def random_effects_mean(g: np.ndarray, se: np.ndarray) -> tuple[float, float, float, np.ndarray]:
    """DerSimonian-Laird mean of at least two finite values with positive standard
    errors: (mean, tau^2, Q, the random-effects weights). See :func:`pooled_rate`."""
    w = 1.0 / se ** 2
    mean = float(np.sum(w * g) / np.sum(w))
    q = float(np.sum(w * (g - mean) ** 2))
    tau2 = max(0.0, (q - (g.size - 1)) / (np.sum(w) - np.sum(w ** 2) / np.sum(w)))
    w_star = 1.0 / (se ** 2 + tau2)
    return float(np.sum(w_star * g) / np.sum(w_star)), tau2, q, w_star


def pooled_rate(values, standard_errors, systematic_rel: float = 0.0) -> PooledRate:
    """Inverse-variance weighted mean of per-spherulite rates, random effects if needed.

    DerSimonian & Laird 1986 (Controlled Clinical Trials 7, 177): the between-spherulite
    variance tau^2 = max(0, (Q - (k - 1)) / (S1 - S2 / S1)), with Q the weighted sum of
    squared deviations and S1, S2 the sums of the weights and squared weights; weights
    become 1 / (se_i^2 + tau^2). The 95 % interval uses the t-quantile with k - 1 degrees
    of freedom (wider than the normal one for few spherulites). ``systematic_rel``, a
    relative standard uncertainty shared by all spherulites (:func:`timing_systematic`),
    is added in quadrature as 1.96 * systematic_rel * mean.
    """
    g = np.asarray(values, dtype=float)
    se = np.asarray(standard_errors, dtype=float)
    keep = np.isfinite(g) & np.isfinite(se) & (se > 0)
    g, se = g[keep], se[keep]
    k = g.size
    if k == 0:
        return PooledRate(None, None, 0, None, "no spherulite with a usable growth rate")
    if k == 1:
        mean, half, tau2, q, kind = float(g[0]), float(1.96 * se[0]), None, 0.0, "single spherulite"
    else:
        mean, tau2, q, w_star = random_effects_mean(g, se)
        half = float(stats.t.ppf(0.975, k - 1) / math.sqrt(np.sum(w_star)))
        kind = "random-effects (DerSimonian-Laird)" if tau2 > 0 else "fixed-effect"
    systematic = 1.96 * systematic_rel * abs(mean)
    total = math.sqrt(half ** 2 + systematic ** 2)
    text = (f"{kind} inverse-variance mean of {k}, Q = {q:.3g}" if k > 1 else kind)
    if systematic_rel > 0:
        text += f"; shared timing uncertainty {100 * systematic_rel:.2g} % added in quadrature"
    return PooledRate(mean, total, k, tau2, text, half, float(systematic_rel))


def soft_l1_cost(resid: np.ndarray, f_scale_s: float) -> float:
    """The soft-L1 cost sum(2 (sqrt(1 + (r/f)^2) - 1)) f^2 / 2 that the fits minimise."""
    z = (np.asarray(resid, float) / f_scale_s) ** 2
    return float(0.5 * f_scale_s ** 2 * np.sum(2.0 * (np.sqrt(1.0 + z) - 1.0)))


def cone_arrival_s(fit: ConeFit, x, y) -> np.ndarray:
    """Arrival time (s) of one fitted cone's front at the given pixels."""
    return fit.t0_s + fit.slope_s_per_px * np.hypot(np.asarray(x, float) - fit.x_px,
                                                    np.asarray(y, float) - fit.y_px)


def cone_residuals(fit: ConeFit, x, y, t) -> np.ndarray:
    """Model minus measured arrival time at the given pixels, s."""
    return cone_arrival_s(fit, x, y) - np.asarray(t, float)


def residual_scale_s(fit: ConeFit, x, y, t) -> float:
    """Robust scale (1.4826 MAD) of a cone fit's residuals, s."""
    resid = cone_residuals(fit, x, y, t)
    return float(1.4826 * np.median(np.abs(resid - np.median(resid))))


def _two_cone_residuals(p, x, y, t, n_bound=0):
    """Model minus measured arrival; the last ``n_bound`` pixels only bound the arrival
    from above (``t`` is the bound there): they count only where the model exceeds it."""
    a = p[2] + p[6] * np.hypot(x - p[0], y - p[1])
    b = p[5] + p[6] * np.hypot(x - p[3], y - p[4])
    resid = np.minimum(a, b) - t
    if n_bound:
        resid[-n_bound:] = np.maximum(resid[-n_bound:], 0.0)
    return resid


def _two_cone_jacobian(p, x, y, t, n_bound=0):
    """Analytic Jacobian of :func:`_two_cone_residuals`: each pixel depends on the
    parameters of the cone that reaches it first (bound pixels only when violated)."""
    ra = np.maximum(np.hypot(x - p[0], y - p[1]), 1e-9)
    rb = np.maximum(np.hypot(x - p[3], y - p[4]), 1e-9)
    first_a = p[2] + p[6] * ra <= p[5] + p[6] * rb
    jac = np.zeros((x.size, 7))
    jac[:, 0] = np.where(first_a, -p[6] * (x - p[0]) / ra, 0.0)
    jac[:, 1] = np.where(first_a, -p[6] * (y - p[1]) / ra, 0.0)
    jac[:, 2] = first_a
    jac[:, 3] = np.where(first_a, 0.0, -p[6] * (x - p[3]) / rb)
    jac[:, 4] = np.where(first_a, 0.0, -p[6] * (y - p[4]) / rb)
    jac[:, 5] = ~first_a
    jac[:, 6] = np.where(first_a, ra, rb)
    if n_bound:
        inactive = _two_cone_residuals(p, x[-n_bound:], y[-n_bound:], t[-n_bound:], n_bound) <= 0
        jac[-n_bound:][inactive] = 0.0
    return jac


def bound_violation_s(fit: ConeFit, x, y, limit_s: float) -> np.ndarray:
    """How far (s) a cone's arrival exceeds ``limit_s`` at pixels known to have
    crystallised by then (e.g. crystalline in the first frame); 0 where it does not."""
    return np.maximum(cone_arrival_s(fit, x, y) - limit_s, 0.0)


def fit_two_cones(x, y, t, start_a, start_b, slope_s_per_px: float, *, f_scale_s: float,
                  bound=None, start_t0_s: float | None = None):
    """Two cones with a common slope (same G), t = min(cone a, cone b), robust fit.

    Used to test whether one territory actually holds two nuclei that were never
    separated (overlapping already in the first frame, or closer than the flooding
    resolves). ``bound`` = (x, y, limit_s): pixels known to have crystallised by
    ``limit_s`` (a crystal present in the first frame), which count only where the model
    arrives later. ``start_t0_s``: starting nucleation time of both cones (default: just
    before the earliest pixels). Returns (params [xa, ya, t0a, xb, yb, t0b, s], soft-L1
    cost over measured and bound pixels).
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x, y, t))
    t0 = float(np.percentile(t, 1)) - slope_s_per_px
    n_bound = 0
    if bound is not None and len(bound[0]):
        bx, by = np.asarray(bound[0], float), np.asarray(bound[1], float)
        n_bound = bx.size
        x, y = np.concatenate([x, bx]), np.concatenate([y, by])
        t = np.concatenate([t, np.full(n_bound, float(bound[2]))])
        t0 = min(t0, float(bound[2]) - slope_s_per_px)
    if start_t0_s is not None:
        t0 = float(start_t0_s)
    x0 = np.array([start_a[0], start_a[1], t0, start_b[0], start_b[1], t0, slope_s_per_px])
    lo = [-np.inf, -np.inf, -np.inf, -np.inf, -np.inf, -np.inf, 1e-9]
    fit = optimize.least_squares(_two_cone_residuals, x0, jac=_two_cone_jacobian,
                                 args=(x, y, t, n_bound), loss="soft_l1",
                                 f_scale=f_scale_s, bounds=(lo, [np.inf] * 7), max_nfev=200)
    return fit.x, soft_l1_cost(_two_cone_residuals(fit.x, x, y, t, n_bound), f_scale_s)


def _cones_arrival(p, x, y):
    """Arrival of k cones p = [x1, y1, t01, ..., xk, yk, t0k, s] at (x, y) and which is first."""
    k = (p.size - 1) // 3
    each = np.stack([p[3 * i + 2] + p[-1] * np.hypot(x - p[3 * i], y - p[3 * i + 1]) for i in range(k)])
    first = np.argmin(each, axis=0)
    return each[first, np.arange(x.size)], first


def _cones_residuals(p, x, y, t, n_bound=0):
    resid = _cones_arrival(p, x, y)[0] - t
    if n_bound:
        resid[-n_bound:] = np.maximum(resid[-n_bound:], 0.0)
    return resid


def _cones_jacobian(p, x, y, t, n_bound=0):
    k = (p.size - 1) // 3
    model, first = _cones_arrival(p, x, y)
    cx, cy = p[0:3 * k:3][first], p[1:3 * k:3][first]
    r = np.maximum(np.hypot(x - cx, y - cy), 1e-9)
    jac = np.zeros((x.size, p.size))
    rows = np.arange(x.size)
    jac[rows, 3 * first] = -p[-1] * (x - cx) / r
    jac[rows, 3 * first + 1] = -p[-1] * (y - cy) / r
    jac[rows, 3 * first + 2] = 1.0
    jac[:, -1] = r
    if n_bound:
        inactive = model[-n_bound:] - t[-n_bound:] <= 0
        jac[-n_bound:][inactive] = 0.0
    return jac


def fit_cones(x, y, t, starts_xy, slope_s_per_px: float, *, f_scale_s: float, start_t0_s: float,
              bound=None):
    """k cones with a common slope (same G), t = min over the cones, robust fit.

    The k-nucleus generalisation of :func:`fit_two_cones` for a crystal present in the
    first frame that may hold several nuclei (Johnson-Mehl cells: Johnson & Mehl 1939,
    Trans. AIME 135, 416). ``starts_xy``: (k, 2) starting apexes, px; ``bound`` as in
    :func:`fit_two_cones`. Returns (params [x1, y1, t01, ..., xk, yk, t0k, s], soft-L1
    cost over measured and bound pixels, index of the first cone at each measured and
    bound pixel).
    """
    x, y, t = (np.asarray(a, dtype=float) for a in (x, y, t))
    n_bound = 0
    if bound is not None and len(bound[0]):
        n_bound = len(bound[0])
        x = np.concatenate([x, np.asarray(bound[0], float)])
        y = np.concatenate([y, np.asarray(bound[1], float)])
        t = np.concatenate([t, np.full(n_bound, float(bound[2]))])
    starts = np.asarray(starts_xy, float).reshape(-1, 2)
    x0 = np.concatenate([np.column_stack([starts, np.full(len(starts), start_t0_s)]).ravel(),
                         [slope_s_per_px]])
    lo = [-np.inf] * (x0.size - 1) + [1e-9]
    fit = optimize.least_squares(_cones_residuals, x0, jac=_cones_jacobian, args=(x, y, t, n_bound),
                                 loss="soft_l1", f_scale=f_scale_s, bounds=(lo, [np.inf] * x0.size),
                                 tr_solver="lsmr",  # the dense SVD stalled on these Jacobians
                                 max_nfev=200)
    cost = soft_l1_cost(_cones_residuals(fit.x, x, y, t, n_bound), f_scale_s)
    return fit.x, cost, _cones_arrival(fit.x, x, y)[1]
