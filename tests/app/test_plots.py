"""Curves the plots panel draws from a result."""

from __future__ import annotations

import numpy as np
import pytest

from analysis.results import AvramiParameters
from app.microscopy.plots_panel import avrami_curve, nuclei_count_curve


def test_nuclei_count_is_a_step_curve_held_to_the_end():
    t, n = nuclei_count_curve([30.0, None, 10.0, 20.0], end_s=50.0)
    assert t.tolist() == [10.0, 20.0, 20.0, 30.0, 30.0, 50.0]
    assert n.tolist() == [1.0, 1.0, 2.0, 2.0, 3.0, 3.0]
    assert nuclei_count_curve([None])[0].size == 0


def test_avrami_curve_starts_at_the_induction_time_and_halves_at_t_half():
    # X(t) = 1 - exp(-k t^n) reaches 1/2 at t_half = (ln 2 / k)^(1/n): Avrami 1940,
    # J. Chem. Phys. 8, 212  # from memory (as listed in docs/sources.md §1)
    k, n, origin_s = 0.05, 2.0, 30.0
    t_s, x = avrami_curve(AvramiParameters(n, k, None), 600.0, origin_s)
    assert t_s[0] == origin_s and x[0] == 0.0
    t_half_s = origin_s + 60.0 * (np.log(2) / k) ** (1 / n)
    assert np.interp(t_half_s, t_s, x) == pytest.approx(0.5, abs=2e-3)
    assert avrami_curve(AvramiParameters(None, None, None), 600.0) is None


def test_scale_bar_picks_round_lengths():
    from app.microscopy.annotations import (
        format_clock,
        format_length_um,
        nice_length_um,
    )

    assert [nice_length_um(v) for v in (0.7, 3.0, 74.0, 180.0, 999.0)] == [0.5, 2.0, 50.0, 100.0, 500.0]
    assert format_length_um(2000.0) == "2 mm" and format_length_um(50.0) == "50 µm"
    assert format_clock(-5.0) == "-0:05.0" and format_clock(125.25) == "2:05.2"
