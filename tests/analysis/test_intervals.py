"""Interval formulas against textbook cases, and intervals that widen with the noise."""

import math
from dataclasses import replace

import numpy as np
import pytest

from analysis.errors import InputError
from analysis.intervals import (
    Estimate,
    basic_interval,
    percentile_interval,
    poisson_count_interval,
    poisson_resample,
    quadrature,
    rate_estimate,
)
from analysis.kinetics.calorimetry import _ar1_inflation, analyze_isotherm, white_noise_sigma
from analysis.kinetics.calorimetry_import import Isotherm
from analysis.kinetics.calorimetry_intervals import calorimetry_intervals
from analysis.kinetics.lauritzen_hoffman import LHConstants, lh_growth_rate
from analysis.kinetics.lh_intervals import (
    fit_with_temperature,
    lh_intervals,
    log_growth_slope_per_k,
    temperature_half_width,
    with_temperature,
)
from analysis.kinetics.uncertainty import prediction_intervals, ratio_interval
from analysis.project.file import FORMAT, SCHEMA_VERSION, project_from_dict
from analysis.project.model import Experiment, Project, stage_uncertainty_k
from analysis.settings import DEFAULT_STAGE_UNCERTAINTY_K
from analysis.results import ExperimentResult, Nucleation, PooledGrowthRate, Spherulite
from analysis.spherulites.growth import pooled_rate, timing_systematic
from analysis.synthetic.dsc import simulate_dsc_isotherm


# ---------------------------------------------------------------- formulas
def test_garwood_interval_matches_the_published_table():
    # exact Poisson limits (Garwood 1936, Biometrika 28, 437; tabulated in Ulm 1990,
    # Am. J. Epidemiol. 131, 373): k = 0 -> (0, 3.689), k = 10 -> (4.795, 18.39)
    assert poisson_count_interval(0) == pytest.approx((0.0, 3.689), abs=1e-3)
    assert poisson_count_interval(10) == pytest.approx((4.795, 18.39), abs=1e-3)
    with pytest.raises(ValueError):
        poisson_count_interval(-1)


def test_rate_estimate_scales_the_count_interval_by_the_exposure():
    est = rate_estimate(10, 0.5)  # 10 nuclei in 0.5 mm^2
    assert est.value == 20.0 and est.low == pytest.approx(2 * 4.795, abs=2e-3)
    assert est.high == pytest.approx(2 * 18.39, abs=2e-3)
    assert rate_estimate(3, 0.0).value is None


def test_garwood_interval_covers_a_poisson_mean_at_least_95_percent():
    # the exact interval is conservative: coverage >= 95 % for every mean (Garwood 1936)
    rng = np.random.default_rng(7)
    mean = 12.0
    counts = rng.poisson(mean, 4000)
    covered = [lo <= mean <= hi for lo, hi in map(poisson_count_interval, counts)]
    assert np.mean(covered) >= 0.95


def test_percentile_interval_of_a_mean_approaches_the_normal_interval():
    # for the mean of n normal values the bootstrap percentile interval approaches
    # xbar +- 1.96 s / sqrt(n) (Efron & Tibshirani 1993, An Introduction to the
    # Bootstrap, ch. 13)
    rng = np.random.default_rng(3)
    x = rng.normal(10.0, 2.0, 200)
    means = np.array([x[rng.integers(0, x.size, x.size)].mean() for _ in range(4000)])
    low, high = percentile_interval(means)
    half = 1.96 * x.std(ddof=1) / math.sqrt(x.size)
    assert (high - low) / 2 == pytest.approx(half, rel=0.06)
    assert percentile_interval([1.0, 2.0]) == (None, None)  # too few draws


def test_poisson_resample_carries_the_counting_error():
    # Poisson bootstrap (Hanley & MacGibbon 2006): resample sizes ~ Poisson(n), var = n
    rng = np.random.default_rng(5)
    sizes = [poisson_resample(rng, 50).size for _ in range(3000)]
    assert np.mean(sizes) == pytest.approx(50, rel=0.02)
    assert np.var(sizes) == pytest.approx(50, rel=0.1)


def test_basic_interval_reflects_the_draws_about_the_estimate():
    # basic interval 2 t - q(0.975) .. 2 t - q(0.025) (Davison & Hinkley 1997, Bootstrap
    # Methods and their Application, eq. 5.6; from memory)
    draws = np.linspace(11.0, 13.0, 1001)  # biased up by 2 around a point of 10
    low, high = basic_interval(10.0, draws)
    q_lo, q_hi = np.quantile(draws, [0.025, 0.975])
    assert (low, high) == pytest.approx((20 - q_hi, 20 - q_lo))
    assert high < 10.0  # the bias the draws repeat is taken out
    assert basic_interval(10.0, [1.0, 2.0]) == (None, None)  # too few draws


def test_basic_interval_of_a_mean_is_the_normal_interval():
    # unbiased, symmetric statistic: basic = percentile = xbar +- 1.96 s / sqrt(n)
    # (Efron & Tibshirani 1993, ch. 13)
    rng = np.random.default_rng(4)
    x = rng.normal(5.0, 1.0, 400)
    means = np.array([x[rng.integers(0, x.size, x.size)].mean() for _ in range(4000)])
    low, high = basic_interval(x.mean(), means)
    half = 1.96 * x.std(ddof=1) / math.sqrt(x.size)
    assert (low, high) == pytest.approx((x.mean() - half, x.mean() + half), abs=0.1 * half)


def test_quadrature_and_ratio_on_the_log_scale():
    # independent components add in quadrature (JCGM 100:2008, GUM 5.1.2)
    assert quadrature(3.0, 4.0, None) == 5.0
    num = Estimate(2.0, 2.0 / math.e, 2.0 * math.e)   # ln half-width 1
    den = Estimate(1.0, 1.0 / math.e, 1.0 * math.e)   # ln half-width 1
    r = ratio_interval(num, den)
    assert r.value == 2.0
    assert math.log(r.high / r.value) == pytest.approx(math.sqrt(2.0))
    assert ratio_interval(Estimate(2.0), den).low is None


def test_pooled_rate_adds_the_shared_timing_term_in_quadrature():
    # DerSimonian & Laird 1986 (Control. Clin. Trials 7, 177): homogeneous values give
    # tau^2 = 0, the fixed-effect mean and half-width t(k-1) / sqrt(sum w)
    g, se = [10.0, 10.1, 9.9, 10.0], [0.1, 0.1, 0.1, 0.1]
    plain = pooled_rate(g, se)
    assert plain.tau2 == 0.0 and plain.value == pytest.approx(10.0)
    from scipy import stats
    assert plain.ci95_half_width == pytest.approx(stats.t.ppf(0.975, 3) / math.sqrt(400))
    shared = pooled_rate(g, se, systematic_rel=0.01)
    assert shared.ci95_half_width == pytest.approx(math.hypot(plain.ci95_half_width, 1.96 * 0.01 * 10.0))
    assert shared.statistical_half_width == pytest.approx(plain.ci95_half_width)


def test_doubled_noise_doubles_the_fixed_effect_half_width():
    g = [10.0, 10.05, 9.95]
    one = pooled_rate(g, [0.2, 0.2, 0.2])
    two = pooled_rate(g, [0.4, 0.4, 0.4])
    assert two.ci95_half_width == pytest.approx(2 * one.ci95_half_width)


def test_timing_systematic_terms():
    times = np.arange(0.0, 400.0, 10.0)
    regular = timing_systematic(times, 200.0, 0.2, registered_drift_px=0.0)
    assert regular.frame_timing == 0.0 and regular.registration == 0.0
    from analysis.spherulites import growth
    assert regular.interpolation == pytest.approx(growth.INTERPOLATION_FRACTION * 10.0 / 200.0)
    jittered = timing_systematic(times + np.r_[0.0, np.tile([0.5, -0.5], 19), 0.0], 200.0, 0.2, 1.0)
    assert jittered.frame_timing > 0 and jittered.registration == pytest.approx(
        growth.REGISTRATION_PX / (0.2 * 200.0))
    assert jittered.total > regular.total


# ---------------------------------------------------------------- temperature
def test_temperature_half_width_of_an_exponential_law():
    # G = A exp(b T): d ln G / dT = b exactly, so the half-width is 1.96 b G u_T
    # (first-order propagation, JCGM 100:2008, 5.1.2)
    tc = np.array([120.0, 124.0, 128.0, 132.0])
    g = 50.0 * np.exp(-0.3 * (tc - 120.0))
    assert log_growth_slope_per_k(tc, g) == pytest.approx(np.full(4, -0.3))
    half = temperature_half_width(tc, g, 0.5)
    assert half == pytest.approx(1.96 * 0.3 * g * 0.5, rel=1e-3)
    assert temperature_half_width(tc, g, 1.0) == pytest.approx(2 * half)
    low, high = with_temperature(10.0, 9.7, 10.4, 0.4)
    assert (10.0 - low, high - 10.0) == pytest.approx((0.5, math.hypot(0.4, 0.4)))


LH = LHConstants(tm0_c=185.0, tg_c=-10.0, u_star_j_per_mol=6270.0, t_inf_c=-40.0)


def _lh_series(rel, seed, u_t=0.5):
    rng = np.random.default_rng(seed)
    tc = np.linspace(124.0, 136.0, 6)
    g = lh_growth_rate(tc + u_t * rng.standard_normal(6), math.exp(28.51), 4.6e5, LH)
    g = g * np.exp(rel * rng.standard_normal(6))
    ci = 1.96 * rel * g
    fit = fit_with_temperature(tc, g, ci, u_t, constants=LH, detect_regimes=False)
    return fit, lh_intervals(fit, ci, u_t, seed=1, resamples=300)


def test_lh_intervals_contain_the_fit_and_widen_with_the_errors():
    # Kg interval from the parametric bootstrap (Efron & Tibshirani 1993, ch. 6)
    fit, small = _lh_series(0.01, seed=2, u_t=0.2)
    assert small.kg_k2.low < fit.overall.kg_k2 < small.kg_k2.high
    assert small.g0_um_per_min.low < fit.overall.g0_um_per_min < small.g0_um_per_min.high
    _, large = _lh_series(0.02, seed=2, u_t=0.4)  # every error doubled
    assert large.kg_k2.half_width > 1.6 * small.kg_k2.half_width


def test_stage_uncertainty_setting_defaults_overrides_and_validates():
    exp = Experiment("a", "a.tif")
    project = Project(experiments=(exp,))
    assert stage_uncertainty_k(project, exp) == DEFAULT_STAGE_UNCERTAINTY_K == 0.5
    project = Project(experiments=(exp,), series={"stage_uncertainty_k": 1.0})
    assert stage_uncertainty_k(project, exp) == 1.0
    own = Experiment("b", "b.tif", stage_uncertainty_k=0.2)
    assert stage_uncertainty_k(project, own) == 0.2

    def load(series, experiment):
        doc = {"format": FORMAT, "schema_version": SCHEMA_VERSION, "series": series,
               "experiments": [{"name": "a", "stack": "a.tif", **experiment}]}
        return project_from_dict(doc, "/tmp/p.spherokin.json")

    loaded = load({"stage_uncertainty_k": 1.5, "resampling_seed": 7}, {"stage_uncertainty_k": 0.3})
    assert stage_uncertainty_k(loaded, loaded.experiments[0]) == 0.3
    assert loaded.series["resampling_seed"] == 7
    for bad in (-0.1, 25.0, "warm"):
        with pytest.raises(InputError, match="stage_uncertainty_k"):
            load({"stage_uncertainty_k": bad}, {})
        with pytest.raises(InputError, match="stage_uncertainty_k"):
            load({}, {"stage_uncertainty_k": bad})


# ---------------------------------------------------------------- calorimetry
def _calorimetry(noise_mw):
    dsc = simulate_dsc_isotherm(noise_mw=noise_mw, seed=4)
    iso = Isotherm("run.csv", dsc.time_s / 60.0, dsc.heat_flow_mw, "mW", "t", "q", mass_mg=5.0)
    result = analyze_isotherm(iso)
    ci = calorimetry_intervals(iso, result, {}, analyze_isotherm=analyze_isotherm,
                               noise_sigma=white_noise_sigma(iso.heat_flow), seed=3)
    return dsc, result, ci


def test_calorimetry_interval_reflects_choices_and_noise():
    dsc, result, ci = _calorimetry(0.01)
    # the chosen analysis, 2 more lags, a later baseline end, 3 more windows, 2 more onset ranges
    assert ci.variants == 9 and ci.noise_draws == 16
    assert ci.n.low < result.avrami.n < ci.n.high
    # far wider than the scatter of the points about the Avrami line (the old "± 0.0003")
    assert ci.n.half_width > 20 * result.avrami.n_ci95
    _, _, doubled = _calorimetry(0.02)
    assert doubled.n.half_width > ci.n.half_width
    assert doubled.t_half_min.half_width > ci.t_half_min.half_width


class _Fit:
    def __init__(self, n, k, t_half):
        self.n, self.k_per_min_n, self.t_half_min = n, k, t_half


class _Analysis:
    def __init__(self, fit):
        self.avrami = fit


def test_a_choice_counts_as_a_rectangular_distribution_about_its_middle():
    # a quantity known only to lie in [a-, a+]: midpoint, u = half-range / sqrt(3)
    # (JCGM 100:2008, GUM 4.3.7). Only the lag choice moves t_half here: 1.00, 0.98, 0.96.
    dsc = simulate_dsc_isotherm(noise_mw=0.0, seed=4)
    iso = Isotherm("run.csv", dsc.time_s / 60.0, dsc.heat_flow_mw, "mW", "t", "q", mass_mg=5.0)
    result = replace(analyze_isotherm(iso), induction_time_se_min=0.0)
    t_half_by_lag = {0.0: 1.00, 4.0: 0.98, 8.0: 0.96}

    def fake_analysis(_iso, lag_s=0.0, **_options):
        return _Analysis(_Fit(3.0, math.log(2.0) / t_half_by_lag[lag_s] ** 3, t_half_by_lag[lag_s]))

    chosen = fake_analysis(iso)
    result = replace(result, avrami=chosen.avrami)
    ci = calorimetry_intervals(iso, result, {}, analyze_isotherm=fake_analysis, noise_sigma=1e-9)
    half = 1.96 * 0.02 / math.sqrt(3.0)
    assert ci.t_half_min.value == 1.00  # the reported value stays the user's analysis
    assert (ci.t_half_min.low, ci.t_half_min.high) == pytest.approx((0.98 - half, 0.98 + half))
    assert ci.n.low == ci.n.high == 3.0  # no choice moves n
    # a choice given by the user (here the lag) is not varied
    fixed = calorimetry_intervals(iso, result, {"lag_s": 4.0}, analyze_isotherm=fake_analysis,
                                  noise_sigma=1e-9)
    assert fixed.variants == 7


def test_doubled_noise_doubles_the_noise_part_of_the_calorimetry_interval():
    # the noise part is 1.96 x the spread of the estimate over records with added noise of
    # the given level (parametric bootstrap, Efron & Tibshirani 1993, ch. 6): for a statistic
    # linear in the heat flow, twice the level gives exactly twice the half-width
    dsc = simulate_dsc_isotherm(noise_mw=0.0, seed=4)
    iso = Isotherm("run.csv", dsc.time_s / 60.0, dsc.heat_flow_mw, "mW", "t", "q", mass_mg=5.0)
    result = replace(analyze_isotherm(iso), induction_time_se_min=0.0)

    def linear_analysis(record, **_options):  # no choice moves it; the noise does
        t_half = 1.0 + float(np.mean(record.heat_flow))
        return _Analysis(_Fit(3.0, math.log(2.0) / t_half ** 3, t_half))

    result = replace(result, avrami=linear_analysis(iso).avrami)
    one, two = (calorimetry_intervals(iso, result, {}, analyze_isotherm=linear_analysis,
                                      noise_sigma=level, seed=5) for level in (0.01, 0.02))
    assert one.t_half_min.half_width > 0
    assert two.t_half_min.half_width == pytest.approx(2 * one.t_half_min.half_width, rel=1e-9)


def test_white_noise_level_ignores_the_slope_of_a_steep_signal():
    # second differences of white noise have variance 6 sigma^2; a smooth steep peak
    # hardly contributes (robust MAD scale, Hampel 1974, J. Am. Stat. Assoc. 69, 383;
    # from memory)
    rng = np.random.default_rng(9)
    t = np.linspace(0.0, 10.0, 3000)
    y = 8.0 * np.exp(-((t - 5.0) / 1.0) ** 2) + 0.003 * rng.standard_normal(t.size)
    assert white_noise_sigma(y) == pytest.approx(0.003, rel=0.1)
    assert white_noise_sigma(2 * y) == pytest.approx(2 * white_noise_sigma(y), rel=1e-9)


def test_ar1_inflation_of_the_onset_standard_error():
    # variance of a mean of an AR(1) series is (1 + r)/(1 - r) times the white-noise one
    # (Bayley & Hammersley 1946, Suppl. J. R. Stat. Soc. 8, 184; from memory)
    rng = np.random.default_rng(2)
    e = np.empty(20000)
    e[0] = 0.0
    for i in range(1, e.size):
        e[i] = 0.8 * e[i - 1] + rng.standard_normal()
    assert _ar1_inflation(e) == pytest.approx(math.sqrt(1.8 / 0.2), rel=0.05)
    assert _ar1_inflation(rng.standard_normal(5000)) == pytest.approx(1.0, abs=0.05)


# ---------------------------------------------------------------- prediction
def _result(count, g=10.0, n_ok=25, seed=0, rel_se=0.02):
    rng = np.random.default_rng(seed)
    rates = g * (1 + rel_se * rng.standard_normal(n_ok))
    sph = tuple(Spherulite(i, 0.0, 0.0, 0.0, 1.0, float(r), 0.1, 0.99, 10, "ok",
                           growth_rate_se_um_per_min=g * rel_se) for i, r in enumerate(rates))
    area = 0.1
    nuc = Nucleation(count, "athermal", count / area, count / area / 0.02, None, None, 0.0,
                     burst_density_per_mm2=count / area, field_area_mm2=area)
    pooled = pooled_rate(rates, [g * rel_se] * n_ok)
    return ExperimentResult(
        stack="s.tif", frames=10, um_per_px=1.0, interval_s=1.0, temperature_c=130.0,
        thickness_um=20.0, spherulites=sph, radii=(),
        growth_rate=PooledGrowthRate(pooled.value, pooled.value - pooled.ci95_half_width,
                                     pooled.value + pooled.ci95_half_width, n_ok),
        nucleation=nuc, area_fraction_time_s=np.zeros(0), area_fraction=np.zeros(0))


def test_prediction_interval_follows_the_poisson_count():
    # k = (4 pi / 3) N_V G^3 (docs/sources.md 1.2); with G nearly exact the relative
    # 95 % interval of k is that of the Poisson count (Garwood 1936)
    result = _result(100, rel_se=0.0005)
    pi = prediction_intervals(result, "bulk-3d", seed=11)
    low, high = poisson_count_interval(100)
    assert pi.k_per_min_n.low / pi.k_per_min_n.value == pytest.approx(low / 100, abs=0.03)
    assert pi.k_per_min_n.high / pi.k_per_min_n.value == pytest.approx(high / 100, abs=0.03)
    assert pi.n.low == pi.n.value == pi.n.high == 3.0
    # t_half = (ln 2 / k)^(1/3): its interval is the k interval to the power -1/3
    assert pi.t_half_min.high / pi.t_half_min.value == pytest.approx(
        (pi.k_per_min_n.value / pi.k_per_min_n.low) ** (1 / 3), rel=0.02)


def test_prediction_is_reproducible_and_widens_with_fewer_nuclei():
    result = _result(100)
    a = prediction_intervals(result, "bulk-3d", seed=5)
    b = prediction_intervals(result, "bulk-3d", seed=5)
    c = prediction_intervals(result, "bulk-3d", seed=6)
    assert (a.k_per_min_n.low, a.k_per_min_n.high) == (b.k_per_min_n.low, b.k_per_min_n.high)
    assert a.k_per_min_n.low != c.k_per_min_n.low
    few = prediction_intervals(_result(25), "bulk-3d", seed=5)  # relative Poisson error x2
    ratio = few.k_per_min_n.half_width / few.k_per_min_n.value / (
        a.k_per_min_n.half_width / a.k_per_min_n.value)
    assert 1.6 < ratio < 2.6
    noisy = prediction_intervals(_result(100, rel_se=0.08), "bulk-3d", seed=5)  # scatter x4
    assert noisy.t_half_min.half_width > a.t_half_min.half_width
