"""Search for a regime break in a Lauritzen-Hoffman plot in time linear in the points.

A break may sit in any gap between two measured temperatures with at least three points
on each side. Minimising the exact residual sum of squares (RSS) of the two-segment fit
inside every gap costs O(n) per evaluation and so O(n^2) for the whole search (68 s for
a 10 000-row table). Here, when there are more than :data:`EXACT_SEARCH_GAPS` gaps,
every gap is first screened on a grid of break positions with the RSS computed in O(1)
from cumulative weighted sums of the points sorted by x; only the
:data:`REFINED_GAPS` best gaps are then minimised exactly. Tables with few gaps (every
real temperature series) are searched exactly in every gap, as before.

The closed forms are ordinary weighted least squares (normal equations) on centred and
scaled coordinates, which keeps the subtraction ``sum w y^2 - b' A^-1 b`` well
conditioned enough for ranking; the returned RSS always comes from the exact fit.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from scipy import optimize

__all__ = ["EXACT_SEARCH_GAPS", "best_break", "best_free_split", "temperature_gaps"]

#: Up to this many gaps every one is minimised exactly (a temperature series has ~5-20).
EXACT_SEARCH_GAPS = 64
#: Gaps kept after screening for the exact minimisation; more than one guards against a
#: grid point landing beside a narrow minimum.
REFINED_GAPS = 8
#: Break positions evaluated per gap when screening (both ends and evenly between).
GRID_POINTS = 12
MIN_SIDE = 3  # points needed on each side of a break


def temperature_gaps(tc) -> np.ndarray:
    """``(m, 2)`` array of (low, high) neighbouring temperatures with >= 3 points each side."""
    temps, counts = np.unique(np.asarray(tc, dtype=float), return_counts=True)
    below = np.cumsum(counts)[:-1]  # points at or below temps[i]
    keep = (below >= MIN_SIDE) & (counts.sum() - below >= MIN_SIDE)
    return np.column_stack([temps[:-1][keep], temps[1:][keep]])


def _centred(x, y, w):
    """x and y centred on their weighted means, x scaled to unit range; and (x0, scale)."""
    scale = max(float(np.ptp(x)), 1e-300)
    x0, y0 = float(np.average(x, weights=w)), float(np.average(y, weights=w))
    return (x - x0) / scale, y - y0, (x0, scale)


def _cumulative_sums(xs, ys, w) -> np.ndarray:
    """Rows k = sums over the first k points of w, w x, w x^2, w y, w x y, w y^2."""
    columns = np.column_stack([w, w * xs, w * xs * xs, w * ys, w * xs * ys, w * ys * ys])
    return np.vstack([np.zeros(6), np.cumsum(columns, axis=0)])


def hinge_rss_screen(x, y, w, xb) -> np.ndarray:
    """RSS of the continuous two-segment fit for each break position ``xb`` (in x units)."""
    xs, ys, (x0, scale) = _centred(x, y, w)
    order = np.argsort(xs, kind="stable")
    sums = _cumulative_sums(xs[order], ys[order], w[order])
    xb = (np.asarray(xb, dtype=float) - x0) / scale
    split = np.searchsorted(xs[order], xb, side="right")
    low, total = sums[split], sums[-1]
    high = total - low
    normal = np.zeros((xb.size, 3, 3))
    rhs = np.zeros((xb.size, 3))
    normal[:, 0, 0], rhs[:, 0] = total[0], total[3]
    for column, part in ((1, low), (2, high)):
        w_, wx, wxx, wy, wxy = (part[:, j] for j in range(5))
        normal[:, 0, column] = normal[:, column, 0] = wx - xb * w_
        normal[:, column, column] = wxx - 2 * xb * wx + xb * xb * w_
        rhs[:, column] = wxy - xb * wy
    normal[:, [1, 2], [1, 2]] += 1e-300  # an empty side: a zero column, not a singular solve
    coef = np.linalg.solve(normal, rhs[..., None])[..., 0]
    return np.maximum(total[5] - np.einsum("ij,ij->i", coef, rhs), 0.0)


def best_break(tc, x, y, w, x_of_t: Callable, exact_rss: Callable) -> tuple[float, float] | None:
    """(RSS, break temperature in C) of the best continuous two-segment fit, or None.

    ``x_of_t(t_c)`` maps temperatures to LH abscissae; ``exact_rss(t_c)`` is the exact
    RSS of the hinge fit with its break at ``t_c``.
    """
    gaps = temperature_gaps(tc)
    if gaps.size == 0:
        return None
    if len(gaps) > EXACT_SEARCH_GAPS:
        fractions = np.linspace(0.0, 1.0, GRID_POINTS)
        grid = gaps[:, :1] + (gaps[:, 1:] - gaps[:, :1]) * fractions  # (m, GRID_POINTS)
        screened = hinge_rss_screen(x, y, w, x_of_t(grid.ravel())).reshape(grid.shape)
        gaps = gaps[np.argsort(screened.min(axis=1), kind="stable")[:REFINED_GAPS]]
        gaps = gaps[np.argsort(gaps[:, 0])]
    best = None
    for lo, hi in gaps:
        res = optimize.minimize_scalar(exact_rss, bounds=(lo, hi), method="bounded",
                                       options={"xatol": 1e-6})
        if best is None or res.fun < best[0]:
            best = (float(res.fun), float(res.x))
    return best


def _line_rss(part) -> np.ndarray:
    """Weighted RSS of a straight line from the sums of one side (rows of ``part``)."""
    w_, wx, wxx, wy, wxy, wyy = (part[:, j] for j in range(6))
    w_ = np.maximum(w_, 1e-300)
    sxx, sxy, syy = wxx - wx * wx / w_, wxy - wx * wy / w_, wyy - wy * wy / w_
    return np.maximum(syy - np.where(sxx > 0, sxy * sxy / np.maximum(sxx, 1e-300), 0.0), 0.0)


def best_free_split(tc, x, y, w, exact_rss: Callable) -> tuple[float, float] | None:
    """(RSS, break temperature = middle of the gap) of two independent lines, or None.

    ``exact_rss(low_c)`` is the exact RSS of the two lines split after temperature
    ``low_c``.
    """
    gaps = temperature_gaps(tc)
    if gaps.size == 0:
        return None
    if len(gaps) > EXACT_SEARCH_GAPS:
        tc = np.asarray(tc, dtype=float)
        xs, ys, _ = _centred(x, y, w)
        order = np.argsort(tc, kind="stable")  # the split follows temperature
        sums = _cumulative_sums(xs[order], ys[order], w[order])
        split = np.searchsorted(tc[order], gaps[:, 0], side="right")
        screened = _line_rss(sums[split]) + _line_rss(sums[-1] - sums[split])
        gaps = gaps[np.argsort(screened, kind="stable")[:REFINED_GAPS]]
        gaps = gaps[np.argsort(gaps[:, 0])]
    best = None
    for lo, hi in gaps:
        rss = float(exact_rss(lo))
        if best is None or rss < best[0]:
            best = (rss, float((lo + hi) / 2))
    return best
