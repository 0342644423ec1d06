"""Monte Carlo checks of the simulated film kinetics against the JMAK solutions.

Sources: Kolmogorov 1937 (Izv. Akad. Nauk SSSR, Ser. Mat. 1, 355); Johnson & Mehl 1939
(Trans. AIME 135, 416); Avrami 1939, 1940, 1941 (J. Chem. Phys. 7, 1103; 8, 212; 9, 177).
2-D films: X = 1 − exp(−π N_A G² t²) (athermal), X = 1 − exp(−(π/3) Ndot G² t³) (sporadic).

Tolerance. The transformed fraction of a finite field of area A is a random variable. At a
fixed time the untransformed set is the vacancy of a Boolean model (Kolmogorov 1937:
nuclei form a Poisson process in space and time, phantoms included, each occupying a disc
of radius G (t − τ)). Two points at distance r are both untransformed with probability
exp(−Λ(cone_x ∪ cone_y)), so the covariance of the vacancy indicator is
    C(r) = q² [exp(∫ ν(τ) γ(r, G (t − τ)) dτ) − 1],   q = 1 − X,
with γ(r, R) = 2R² acos(r / 2R) − (r / 2) √(4R² − r²) the overlap area of two discs of
radius R (Stoyan, Kendall & Mecke 1995, Stochastic Geometry and its Applications, 2nd ed.,
Wiley, §3.1 — covariance of the Boolean model; # from memory for the section number). The
field average over area A then has variance
    Var(X_A) ≤ (1 / A) ∫_0^∞ C(r) 2π r dr
(the edge correction only lowers it). Near t½ this is of order X(1 − X) / (nuclei in the
field), i.e. the tolerance shrinks as 1/√(number of nuclei). Averaging S independent seeds
divides the variance by S; the tests allow 4 standard deviations.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize

from analysis.synthetic import hot_stage as synthetic
from analysis.synthetic.hot_stage import (
    StackParams,
    johnson_mehl_arrival,
    simulate_film_kinetics,
)

SIZE_PX = 400
SEEDS = range(6)


def _overlap_area(r, radius):
    if radius <= 0 or r >= 2 * radius:
        return 0.0
    return 2 * radius**2 * math.acos(r / (2 * radius)) - 0.5 * r * math.sqrt(4 * radius**2 - r**2)


def _fraction_sd(t_s, n_a_um2, ndot_um2_s, g_um_s, area_um2):
    """Standard deviation of the transformed fraction of one field (see module docstring)."""
    x_ex = math.pi * n_a_um2 * (g_um_s * t_s) ** 2 + (math.pi / 3) * ndot_um2_s * g_um_s**2 * t_s**3
    q = math.exp(-x_ex)

    def shared(r):
        sporadic = integrate.quad(lambda tau: _overlap_area(r, g_um_s * (t_s - tau)), 0, t_s)[0]
        return n_a_um2 * _overlap_area(r, g_um_s * t_s) + ndot_um2_s * sporadic

    covariance = lambda r: q**2 * math.expm1(shared(r)) * 2 * math.pi * r
    variance = integrate.quad(covariance, 0, 2 * g_um_s * t_s, limit=200)[0] / area_um2
    return math.sqrt(variance)


def _mean_fraction(params_list, t_iso):
    return np.mean([simulate_film_kinetics(p).area_fraction(t_iso) for p in params_list], axis=0)


@pytest.mark.parametrize(
    "n_a, ndot, induction_s",
    [(2500.0, 0.0, 0.0), (0.0, 40.0, 0.0), (1000.0, 20.0, 12.0)],
    ids=["athermal n=2", "sporadic n=3", "mixed with induction time"],
)
def test_area_fraction_follows_jmak_2d(n_a, ndot, induction_s):
    """Athermal: X = 1 − exp(−π N_A G² t²); sporadic: X = 1 − exp(−(π/3) Ndot G² t³)
    (Kolmogorov 1937; Johnson & Mehl 1939; Avrami 1939-1941). Mixed: the two extended
    fractions add, with t counted from the induction time (Avrami 1940, J. Chem. Phys. 8, 212)."""
    g_um_min, um_per_px = 12.0, 1.0
    params = [
        StackParams(height_px=SIZE_PX, width_px=SIZE_PX, um_per_px=um_per_px, n_frames=61, interval_s=3.0,
                    growth_rate_um_per_min=g_um_min, n_athermal_per_mm2=n_a, ndot_per_mm2_per_s=ndot,
                    induction_time_s=induction_s, drift_px_per_frame=0.0, drift_jitter_px=0.0, seed=seed)
        for seed in SEEDS
    ]
    g_um_s, n_a_um2, ndot_um2_s = g_um_min / 60, n_a * 1e-6, ndot * 1e-6
    extended = lambda t: math.pi * n_a_um2 * g_um_s**2 * t**2 + (math.pi / 3) * ndot_um2_s * g_um_s**2 * t**3
    t_half = optimize.brentq(lambda t: extended(t) - math.log(2), 0.0, 1e4)
    tau = np.linspace(0.3, 2.2, 14) * t_half
    measured = _mean_fraction(params, tau + induction_s)
    x_ex = np.array([extended(t) for t in tau])
    expected = 1 - np.exp(-x_ex)
    area_um2 = (SIZE_PX * um_per_px) ** 2
    sd = np.array([_fraction_sd(t, n_a_um2, ndot_um2_s, g_um_s, area_um2) for t in tau]) / math.sqrt(len(SEEDS))
    assert np.all(np.abs(measured - expected) <= 4 * sd + 1e-3), (measured, expected, sd)
    assert 0.01 < expected[0] < 0.3 and expected[-1] > 0.9  # the probes span the transformation
    wrong = 1 - np.exp(-1.15 * x_ex)  # a 15 % error in k must be detectable at this tolerance
    assert np.any(np.abs(measured - wrong) > 4 * sd + 1e-3)
    assert np.all(_mean_fraction(params[:1], np.array([induction_s - 1.0])) == 0.0)


def test_surviving_sporadic_nuclei_count_follows_johnson_mehl():
    """Johnson & Mehl 1939 (Trans. AIME 135, 416): nuclei form only in untransformed
    material, so the expected number of real (non-phantom) nuclei in area A up to t is
    A ∫_0^t Ndot (1 − X(τ)) dτ. Counts are Poisson-like (variance ≤ mean): allow 4 √mean."""
    ndot, g_um_min, duration_s = 2.0, 10.0, 400.0
    params = [StackParams(height_px=SIZE_PX, width_px=SIZE_PX, n_frames=41, interval_s=duration_s / 40,
                          growth_rate_um_per_min=g_um_min, n_athermal_per_mm2=0.0, ndot_per_mm2_per_s=ndot,
                          front_width_px=0.05, drift_px_per_frame=0.0, drift_jitter_px=0.0, seed=seed)
              for seed in SEEDS]
    counts = []
    for p in params:
        kin = simulate_film_kinetics(p)
        y, x = kin.centres_yx.T
        inside = (y >= -0.5) & (y < SIZE_PX - 0.5) & (x >= -0.5) & (x < SIZE_PX - 0.5)
        counts.append(np.count_nonzero(inside & (kin.birth_s <= duration_s)))
        assert kin.n_phantoms > 0
    g = g_um_min / 60
    untransformed = lambda t: math.exp(-(math.pi / 3) * ndot * 1e-6 * g**2 * t**3)
    expected = (SIZE_PX**2 * 1e-6) * ndot * integrate.quad(untransformed, 0, duration_s)[0] * len(params)
    assert abs(sum(counts) - expected) <= 4 * math.sqrt(expected)


def test_arrival_map_is_exact_against_brute_force(monkeypatch):
    """t(p) = min_i (t_i + |p − c_i| / G): the Johnson-Mehl arrival time (Johnson & Mehl
    1939); the KD-tree search must give exactly the brute-force minimum."""
    rng = np.random.default_rng(5)
    centres = rng.uniform(-50, 150, (300, 2))
    birth = rng.uniform(0, 200, 300)
    points = rng.uniform(0, 100, (5000, 2))
    arrival, owner = johnson_mehl_arrival(points, centres, birth, 0.4)
    brute = birth[None, :] + np.linalg.norm(points[:, None, :] - centres[None, :, :], axis=2) / 0.4
    np.testing.assert_allclose(arrival, brute.min(axis=1), rtol=1e-12)
    np.testing.assert_array_equal(owner, brute.argmin(axis=1))
    capped, capped_owner = johnson_mehl_arrival(points, centres, birth, 0.4, horizon_s=150.0)
    late = brute.min(axis=1) > 150.0
    assert np.all(np.isinf(capped[late])) and np.all(capped_owner[late] == -1)
    np.testing.assert_allclose(capped[~late], brute.min(axis=1)[~late], rtol=1e-12)
    monkeypatch.setattr(synthetic, "_CHUNK_POINTS", 700)  # the memory-bounded path: small batches
    monkeypatch.setattr(synthetic, "_MAX_CANDIDATES", 100)
    small_batches, _ = johnson_mehl_arrival(points, centres, birth, 0.4)
    np.testing.assert_array_equal(small_batches, arrival)


def test_phantoms_are_exactly_the_nuclei_born_inside_crystal():
    """A nucleus is a phantom when the Johnson-Mehl arrival time at its centre from the
    other nuclei precedes its own birth (Johnson & Mehl 1939; Avrami 1939)."""
    p = StackParams(height_px=120, width_px=120, n_frames=31, n_athermal_per_mm2=100.0,
                    ndot_per_mm2_per_s=3.0, drift_px_per_frame=0.0, drift_jitter_px=0.0, seed=11)
    kin = simulate_film_kinetics(p)
    c, b = kin.centres_yx, kin.birth_s
    g = p.growth_rate_um_per_min / 60 / p.um_per_px
    others = b[None, :] + np.linalg.norm(c[:, None] - c[None, :], axis=2) / g
    np.fill_diagonal(others, np.inf)
    assert np.all(others.min(axis=1) >= b - 1e-9)  # no survivor was born inside crystal
    assert kin.n_phantoms > 0
    pc, pb = kin.phantom_centres_yx, kin.phantom_birth_s
    reached = b[None, :] + np.linalg.norm(pc[:, None] - c[None, :], axis=2) / g
    assert np.all(reached.min(axis=1) < pb)  # every dropped nucleus was born inside crystal
