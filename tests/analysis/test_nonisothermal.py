"""Growth rate over a temperature range from one programme.

Scientific checks
-----------------
* The growth integral along a linear ramp. With G(T) = a + b·T and T(t) = T0 − q·t,
  R(t) = ∫_0^t G(T(t')) dt' = ∫_0^t (a + b T0 − b q t') dt' = a t + b (T0 t − q t²/2)
  (derived here). Every front advances at G(T(t)) along a free ray, so this is the radius
  of a spherulite born at t = 0 (the growth law of a spherulite at a varying temperature:
  Lauritzen & Hoffman 1960, J. Res. NBS 64A, 73, applied instant by instant, as in
  docs/sources.md §2.1).
* G(T) from the Lauritzen-Hoffman equation G0 exp(−U*/(R(T−T∞))) exp(−Kg/(T ΔT f))
  (Hoffman 1983, Polymer 24, 3 `# from memory`; docs/sources.md §2.1) is recovered from
  radii generated along a cooling ramp.
* The area of a circular sector of angle Δθ and radius R is Δθ R²/2 (Euclid; elementary).
"""

import numpy as np
import pytest

from analysis.kinetics.avrami import FitFailure
from analysis.kinetics.lauritzen_hoffman import LHConstants, lh_growth_rate
from analysis.kinetics.nonisothermal import (
    RadiusTrack,
    fit_ramp_growth,
    growth_integral,
)
from analysis.kinetics.temperature_programme import TemperatureProgramme
from analysis.spherulites.fronts import area_radii, front_radii, blocked_distance

CONSTANTS = LHConstants(185.0, -10.0, 6270.0)
KG = 4.6e5
G0 = 2.41e12  # µm/min, invented demo material (sample_images/README.md)


def linear_ramp(t0_c, q_k_per_s, duration_s):
    t = np.linspace(0.0, duration_s, 301)
    return TemperatureProgramme(t, t0_c - q_k_per_s * t)


def test_growth_integral_of_a_linear_ramp_matches_the_closed_form():
    """R = a t + b (T0 t − q t²/2) for G = a + b T, T = T0 − q t (module docstring)."""
    a, b, t0_c, q = -40.0, 0.5, 130.0, 5.0 / 60.0  # G in µm/min, q in K/s
    prog = linear_ramp(t0_c, q, 600.0)
    t = np.array([0.0, 10.0, 77.7, 300.0, 600.0])
    closed_um = (a * t + b * (t0_c * t - q * t ** 2 / 2.0)) / 60.0
    assert growth_integral(t, prog, lambda temp: a + b * temp) == pytest.approx(closed_um, rel=1e-9, abs=1e-9)


def lh_tracks(rng, *, n=12, noise_um=0.1, q=5.0 / 60.0):
    """Radii of n spherulites born at random times along a 140 -> 110 °C ramp, from the
    exact growth integral of the Lauritzen-Hoffman G."""
    prog = linear_ramp(140.0, q, 30.0 / q)
    frames = np.arange(0.0, 30.0 / q, 6.0)
    grow = lambda temp: lh_growth_rate(temp, G0, KG, CONSTANTS)
    s = growth_integral(frames, prog, grow)
    tracks = []
    for k in range(n):
        birth = rng.uniform(60.0, 180.0)
        s_birth = growth_integral(np.array([0.0, birth]), prog, grow)[1]
        radius = s - s_birth
        ok = (radius > 2.0) & (radius < 40.0)
        tracks.append(RadiusTrack(k, frames[ok], radius[ok] + rng.normal(0.0, noise_um, ok.sum())))
    return prog, tracks


def test_joint_fit_recovers_the_lauritzen_hoffman_growth_rate():
    """Hoffman 1983 form (module docstring); tolerances from the noise, not from tuning."""
    prog, tracks = lh_tracks(np.random.default_rng(7))
    growth = fit_ramp_growth(tracks, prog, constants=CONSTANTS)
    truth = lh_growth_rate(growth.temperature_c, G0, KG, CONSTANTS)
    assert np.median(np.abs(growth.growth_rate_um_per_min / truth - 1)) < 0.02
    assert np.mean((growth.ci95_low <= truth) & (truth <= growth.ci95_high)) >= 0.8
    assert growth.lauritzen_hoffman.kg_k2 == pytest.approx(KG, rel=0.02)
    assert growth.n_spherulites.max() == len(tracks)
    born = [t.birth_temperature_c for t in growth.tracks if t.birth_temperature_c is not None]
    assert len(born) >= len(tracks) - 2 and all(110.0 < b < 140.0 for b in born)


def test_a_wrong_spherulite_is_left_out_and_named():
    rng = np.random.default_rng(3)
    prog, tracks = lh_tracks(rng)
    odd = tracks[0]
    tracks[0] = RadiusTrack(99, odd.time_s, odd.radius_um * 0.4 + 5.0)
    growth = fit_ramp_growth(tracks, prog, constants=CONSTANTS)
    assert 99 not in [t.id for t in growth.tracks]
    assert any("99" in w for w in growth.warnings)


def test_too_little_data_is_a_fit_failure():
    prog, tracks = lh_tracks(np.random.default_rng(1), n=1)
    result = fit_ramp_growth(tracks, prog)
    assert isinstance(result, FitFailure) and "need at least 2" in result.reason


def disc_arrivals(radius_of_frame, size=81):
    """Frame index of each pixel of a disc growing from the grid centre."""
    yy, xx = np.mgrid[0:size, 0:size]
    centre = size // 2
    dist = np.hypot(xx - centre, yy - centre)
    frames = np.searchsorted(radius_of_frame, dist)  # first frame whose radius reaches it
    frames[frames >= radius_of_frame.size] = -1
    return xx.ravel(), yy.ravel(), frames.ravel(), centre


def test_area_radius_has_no_small_radius_bias():
    """Sector area Δθ R²/2 (module docstring): sqrt(2n/Δθ) follows the true radius, while
    the farthest pixel of a sector falls short by roughly 1/(R Δθ) px at small R."""
    radius = np.linspace(3.0, 35.0, 17)
    x, y, frames, c = disc_arrivals(radius)
    labels = np.ones((81, 81), np.int32)
    area = area_radii(x, y, frames, labels, 1, c, c, radius.size)
    error = (area - radius)[radius >= 4]
    assert abs(np.mean(error)) < 0.1 and np.max(np.abs(error)) < 0.35  # lattice scatter, no trend
    farthest = front_radii(x, y, frames, blocked_distance(labels, 1, c, c, n_sectors=36, reach_px=60),
                           c, c, radius.size).radius_px
    assert np.mean((farthest - radius)[radius < 8]) < -0.35  # the bias the area radius avoids


def test_ramp_points_join_the_series_fit_only_when_asked():
    """The Tc-series inputs: isothermal entries always, a ramp's G(T) every 2 K on request."""
    from types import SimpleNamespace

    from analysis.reporting.entries import lauritzen_hoffman_inputs, lauritzen_hoffman_sources

    prog, tracks = lh_tracks(np.random.default_rng(5))
    growth = fit_ramp_growth(tracks, prog, constants=CONSTANTS)
    iso = [SimpleNamespace(name=f"iso {t}", ramp=None, temperature_c=t, growth_rate_ci95_half_width=0.1,
                           result=SimpleNamespace(growth_rate=SimpleNamespace(value=g)))
           for t, g in ((124.0, 32.0), (130.0, 6.8))]
    ramp = SimpleNamespace(name="cooling", ramp=SimpleNamespace(growth=growth), temperature_c=None,
                           growth_rate_ci95_half_width=None,
                           result=SimpleNamespace(growth_rate=SimpleNamespace(value=9.9)))
    tc, g, ci = lauritzen_hoffman_inputs(iso + [ramp])
    assert list(tc) == [124.0, 130.0] and ci is not None
    tc, g, ci = lauritzen_hoffman_inputs(iso + [ramp], include_ramps=True)
    sources = lauritzen_hoffman_sources(iso + [ramp], include_ramps=True)
    assert len(tc) > 4 and sources[:2] == ["isothermal", "isothermal"]
    assert set(sources[2:]) == {"ramp: cooling"} and np.all(np.diff(tc[2:]) >= 1.99)
    assert np.all(ci > 0) and np.allclose(g[2:], growth.growth_at(tc[2:]), rtol=1e-9)
