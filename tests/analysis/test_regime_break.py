"""The regime-break search: screening by cumulative sums agrees with exact fits.

The model is the continuous two-segment ("hinge") line of the Lauritzen-Hoffman plot, a
regime transition seen as a change of slope in ln G + U*/R(T - T_inf) against
1/(T dT f) (Hoffman & Miller 1997, Polymer 38, 3151; docs/sources.md §2.3). The checks
are numerical (screening against exact least squares); the data are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis.kinetics import regime_break
from analysis.kinetics.lauritzen_hoffman import LHConstants, fit_lauritzen_hoffman, lh_coordinates

CONSTANTS = LHConstants(186.1, -10.0)


def _hinge_data(n, rng, break_c=130.0, noise=0.02):
    tc = np.sort(rng.uniform(110.0, 150.0, n))
    x, y0 = lh_coordinates(tc, np.ones(n), CONSTANTS)
    xb = lh_coordinates([break_c], [1.0], CONSTANTS)[0][0]
    ln_g = 12.0 - np.where(x < xb, 6e5 * (x - xb), 3e5 * (x - xb)) + rng.normal(0, noise, n)
    return tc, np.exp(ln_g - y0)


def _exact_hinge_rss(x, y, w, xb):
    design = np.column_stack([np.ones_like(x), np.minimum(x - xb, 0), np.maximum(x - xb, 0)])
    sw = np.sqrt(w)
    coef, *_ = np.linalg.lstsq(design * sw[:, None], y * sw, rcond=None)
    return float(np.sum(w * (y - design @ coef) ** 2))


def test_screening_rss_equals_the_exact_least_squares():
    rng = np.random.default_rng(4)
    tc, g = _hinge_data(200, rng)
    x, y = lh_coordinates(tc, g, CONSTANTS)
    w = rng.uniform(0.5, 2.0, x.size)
    breaks = np.quantile(x, [0.1, 0.3, 0.5, 0.8])
    fast = regime_break.hinge_rss_screen(x, y, w, breaks)
    exact = [_exact_hinge_rss(x, y, w, xb) for xb in breaks]
    assert fast == pytest.approx(exact, rel=1e-6)


def test_gaps_need_three_points_each_side():
    gaps = regime_break.temperature_gaps([1, 1, 2, 3, 4, 5, 5, 6])
    assert gaps.tolist() == [[2, 3], [3, 4], [4, 5]]


@pytest.mark.parametrize("model", ["continuous", "free"])
def test_large_table_finds_the_break_like_a_small_one(model):
    rng = np.random.default_rng(7)
    tc, g = _hinge_data(3000, rng)  # 2999 gaps: screened, then refined
    fit = fit_lauritzen_hoffman(tc, g, constants=CONSTANTS, break_model=model)
    assert fit.break_c == pytest.approx(130.0, abs=0.5)
    assert sorted(r.kg_k2 for r in fit.regimes) == pytest.approx([3e5, 6e5], rel=0.02)
