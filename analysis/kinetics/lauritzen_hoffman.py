"""Temperature series: Lauritzen-Hoffman fit of G(Tc), regimes, Hoffman-Weeks.

Public API (stable; the GUI codes against it)
---------------------------------------------
``LHConstants(tm0_c, tg_c, u_star_j_per_mol=DEFAULT_U_STAR_J_PER_MOL, t_inf_c=None)``: ``t_inf_c`` defaults
to Tg - 30 K; ``.t_inf``/``.tm0_k`` properties.
``lh_coordinates(tc_c, g_um_per_min, constants) -> (x, y)``: x = 1/(T dT f) (K^-2),
y = ln G + U*/(R (T - T_inf)).
``lh_growth_rate(tc_c, g0_um_per_min, kg_k2, constants) -> G``.
``fit_lauritzen_hoffman(tc_c, g_um_per_min, ci95_um_per_min=None, *, constants,
detect_regimes=True, material=None, single_regime="II", break_model="continuous") ->
LHAnalysis`` with ``overall``
(one line over all points), ``regimes`` (one or two ``RegimeFit``), ``regime_ratio``,
``break_c``, ``aicc_one``/``aicc_two``, ``sigma_sigma_e_j2_per_m4``, ``sigma_j_m2``,
``sigma_e_j_m2`` (None without material data), ``warnings``.
``secondary_nucleation_dict(analysis)`` / ``write_secondary_nucleation(analysis, out_dir)``:
``secondary_nucleation.json`` per docs/design.md.
``sigma_sigma_e_from_kg(kg, n, b0_m, dhf, tm0_k)``, ``thomas_stavely_sigma(dhf, a0_m, b0_m)``,
``regime_factor(name)`` (2 for II, else 4).
``hoffman_weeks(tc_c, tm_c) -> HoffmanWeeks | FitFailure`` (Tm0, gamma, caveat).
``read_growth_table(path) -> GrowthTable`` (temperature_c, growth_rate_um_per_min[,
ci95_um_per_min]).
``add_cli_arguments(parser)`` / ``run_cli(args)`` for ``spherokin lauritzen-hoffman``.

Science
-------
G = G0 exp(-U*/(R (T - T_inf))) exp(-Kg/(T dT f)), dT = Tm0 - T, f = 2T/(Tm0 + T)
(Lauritzen & Hoffman 1960; Hoffman 1983). The linearised form is fitted by weighted least
squares, weights 1/sigma_lnG^2 with sigma_lnG = (CI95 / 1.96) / G; the parameter covariance
is scaled by max(1, reduced chi^2), so the CI never claims more than the scatter allows.
A regime break is a continuous two-segment line with a free break temperature, kept when
its AICc beats the single line. Kg = n b0 sigma sigma_e Tm0 / (dh_f k_B) with n = 4
(regimes I, III) or 2 (II); sigma from Thomas-Stavely, sigma = alpha dh_f sqrt(a0 b0),
alpha = 0.1 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
from scipy import stats

from analysis.errors import InputError
from analysis.units import write_json_atomic
from analysis.kinetics.avrami import FitFailure
from analysis.outputs import staged_outputs
from analysis.kinetics.regime_break import best_break, best_free_split
from analysis.textio import check_field_count, excerpt, read_text, split_fields
from analysis.settings import DEFAULT_U_STAR_J_PER_MOL, t_inf_default_c

__all__ = ["GrowthTable", "HoffmanWeeks", "LHAnalysis", "LHConstants", "RegimeFit",
           "fit_lauritzen_hoffman", "hoffman_weeks", "lh_coordinates",
           "lh_growth_rate", "read_growth_table", "regime_factor",
           "secondary_nucleation_dict", "sigma_sigma_e_from_kg", "thomas_stavely_sigma",
           "write_secondary_nucleation"]

R_J_PER_MOL_K = 8.314462618
K_B = 1.380649e-23
THOMAS_STAVELY_ALPHA = 0.1
HW_CAVEAT = ("Linear Hoffman-Weeks extrapolation tends to underestimate Tm0: the initial "
             "lamellar thickness varies with undercooling, so Tm(Tc) is not linear even at "
             "constant thickening (Marand, Xu & Srinivas 1998, Macromolecules 31, 8219); "
             "reorganisation during heating also distorts Tm.")


@dataclass(frozen=True)
class LHConstants:
    tm0_c: float
    tg_c: float
    u_star_j_per_mol: float = DEFAULT_U_STAR_J_PER_MOL
    t_inf_c: float | None = None

    @property
    def t_inf(self) -> float:
        """T_inf in deg C (Tg - 30 K unless given)."""
        return t_inf_default_c(self.tg_c) if self.t_inf_c is None else self.t_inf_c

    @property
    def tm0_k(self) -> float:
        return self.tm0_c + 273.15


def _checked_kelvin(tc_c, constants: LHConstants, path=None) -> np.ndarray:
    t = np.asarray(tc_c, dtype=float) + 273.15
    t_inf_k = constants.t_inf + 273.15
    if not np.all(np.isfinite(t)):
        raise InputError("crystallization temperatures must be finite", path)
    bad = t[(t <= t_inf_k) | (t >= constants.tm0_k)]
    if bad.size == t.size and np.all(t <= t_inf_k):
        origin = f" (Tg - 30 K, Tg = {constants.tg_c:g} C)" if constants.t_inf_c is None else ""
        raise InputError(f"T_inf = {constants.t_inf:g} C{origin} is above every Tc; check Tg and "
                         "T_inf", path)
    if bad.size:
        raise InputError(f"Tc = {bad[0] - 273.15:g} C is outside (T_inf, Tm0) = "
                         f"({constants.t_inf:g}, {constants.tm0_c:g}) C", path)
    return t


def lh_coordinates(tc_c, g_um_per_min, constants: LHConstants, path=None):
    """x = 1/(T dT f) in K^-2 and y = ln G + U*/(R (T - T_inf)) (G in um/min)."""
    t = _checked_kelvin(tc_c, constants, path)
    tm0 = constants.tm0_k
    x = (t + tm0) / (2.0 * t ** 2 * (tm0 - t))
    y = np.log(np.asarray(g_um_per_min, dtype=float)) + constants.u_star_j_per_mol / (
        R_J_PER_MOL_K * (t - (constants.t_inf + 273.15)))
    return x, y


def lh_growth_rate(tc_c, g0_um_per_min: float, kg_k2: float, constants: LHConstants):
    """G(Tc) in um/min from G0 (um/min) and Kg (K^2)."""
    x, y0 = lh_coordinates(tc_c, np.ones_like(np.asarray(tc_c, dtype=float)), constants)
    return np.exp(math.log(g0_um_per_min) - kg_k2 * x - y0)


# ---------------------------------------------------------------- fits
@dataclass(frozen=True)
class RegimeFit:
    name: str
    t_low_c: float
    t_high_c: float
    kg_k2: float
    kg_ci95: float | None
    g0_um_per_min: float
    n_points: int


@dataclass(frozen=True)
class LHAnalysis:
    constants: LHConstants
    tc_c: np.ndarray
    g_um_per_min: np.ndarray
    ci95_um_per_min: np.ndarray | None
    overall: RegimeFit
    regimes: tuple[RegimeFit, ...]
    regime_ratio: float | None
    break_c: float | None
    aicc_one: float | None
    aicc_two: float | None
    sigma_sigma_e_j2_per_m4: float | None
    sigma_j_m2: float | None
    sigma_e_j_m2: float | None
    material: str | None = None
    warnings: tuple[str, ...] = field(default=())


def _weights(g, ci95, path) -> np.ndarray:
    if ci95 is None:
        return np.ones_like(g)
    ci = np.asarray(ci95, dtype=float)
    if ci.shape != g.shape or np.any(~np.isfinite(ci)) or np.any(ci <= 0):
        raise InputError("growth-rate CIs must be positive numbers, one per temperature", path)
    return 1.0 / ((ci / 1.96) / g) ** 2


def _wls(design: np.ndarray, y: np.ndarray, w: np.ndarray, absolute: bool):
    """Weighted LS: coefficients, covariance, weighted RSS.

    With known sigmas (``absolute``) the covariance is scaled by max(1, reduced chi^2);
    without, by the residual variance.
    """
    sw = np.sqrt(w)
    coef, *_ = np.linalg.lstsq(design * sw[:, None], y * sw, rcond=None)
    rss = float(np.sum(w * (y - design @ coef) ** 2))
    dof = max(1, y.size - design.shape[1])
    scale = max(1.0, rss / dof) if absolute else rss / dof
    cov = np.linalg.pinv((design * w[:, None]).T @ design) * scale
    return coef, cov, rss


def _line_fit(x, y, w, tc, name, absolute) -> tuple[RegimeFit, float]:
    coef, cov, rss = _wls(np.column_stack([np.ones_like(x), x]), y, w, absolute)
    ci = float(stats.t.ppf(0.975, x.size - 2) * math.sqrt(max(cov[1, 1], 0.0))) if x.size > 2 else None
    return RegimeFit(name, float(tc.min()), float(tc.max()), float(-coef[1]), ci,
                     float(math.exp(coef[0])), int(x.size)), rss


def _aicc(rss: float, n: int, k: int, floor: float) -> float:
    return n * math.log(max(rss, floor) / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)


def _hinge_rss(tb_c, tc, x, y, w, constants, absolute=False):
    xb, _ = lh_coordinates([tb_c], [1.0], constants)
    xb = float(xb[0])
    design = np.column_stack([np.ones_like(x), np.minimum(x - xb, 0.0), np.maximum(x - xb, 0.0)])
    coef, cov, rss = _wls(design, y, w, absolute)
    return rss, coef, cov, xb


def _best_break(tc, x, y, w, constants):
    """Continuous two-segment fit: (rss, break temperature), searched within every gap."""
    return best_break(tc, x, y, w, lambda t: lh_coordinates(t, np.ones_like(t), constants)[0],
                      lambda tb: _hinge_rss(tb, tc, x, y, w, constants)[0])


def _best_free_split(tc, x, y, w):
    """Two independent lines: (rss, break temperature = middle of the best gap)."""
    def split_rss(low_c):
        below = tc <= low_c
        return sum(_wls(np.column_stack([np.ones(m.sum()), x[m]]), y[m], w[m], False)[2]
                   for m in (below, ~below))

    return best_free_split(tc, x, y, w, split_rss)


def _regime_names(kg_low_t: float, kg_high_t: float) -> tuple[str, str]:
    """Tentative names: the larger Kg is regime III below / regime I above regime II."""
    return ("III", "II") if kg_low_t >= kg_high_t else ("II", "I")


def _free_regimes(tc, x, y, w, tb, absolute):
    below = tc <= tb
    low, _ = _line_fit(x[below], y[below], w[below], tc[below], "", absolute)
    high, _ = _line_fit(x[~below], y[~below], w[~below], tc[~below], "", absolute)
    names = _regime_names(low.kg_k2, high.kg_k2)
    return (replace(low, name=names[0], t_high_c=tb), replace(high, name=names[1], t_low_c=tb))


def _two_regimes(tc, x, y, w, constants, tb, absolute):
    rss, coef, cov, xb = _hinge_rss(tb, tc, x, y, w, constants, absolute)
    kg_low, kg_high = -coef[1], -coef[2]  # low T = small x
    t_ppf = stats.t.ppf(0.975, tc.size - 4)
    ci_low, ci_high = (float(t_ppf * math.sqrt(max(cov[j, j], 0.0))) for j in (1, 2))
    names = _regime_names(kg_low, kg_high)
    ln_g0_low = coef[0] - coef[1] * xb
    ln_g0_high = coef[0] - coef[2] * xb
    below = tc <= tb
    return (RegimeFit(names[0], float(tc[below].min()), float(tb), float(kg_low), ci_low,
                      float(math.exp(ln_g0_low)), int(below.sum())),
            RegimeFit(names[1], float(tb), float(tc[~below].max()), float(kg_high), ci_high,
                      float(math.exp(ln_g0_high)), int((~below).sum())))


def regime_factor(name: str) -> int:
    """n in Kg = n b0 sigma sigma_e Tm0 / (dh_f k_B): 2 for regime II, else 4 (I, III)."""
    return 2 if name.split()[0] == "II" else 4


def sigma_sigma_e_from_kg(kg_k2: float, n: int, b0_m: float, delta_hf_j_per_m3: float,
                          tm0_k: float) -> float:
    """sigma sigma_e = Kg dh_f k_B / (n b0 Tm0), J^2/m^4."""
    return kg_k2 * delta_hf_j_per_m3 * K_B / (n * b0_m * tm0_k)


def thomas_stavely_sigma(delta_hf_j_per_m3: float, a0_m: float, b0_m: float,
                         alpha: float = THOMAS_STAVELY_ALPHA) -> float:
    """Lateral surface energy sigma = alpha dh_f sqrt(a0 b0), J/m^2."""
    return alpha * delta_hf_j_per_m3 * math.sqrt(a0_m * b0_m)


def _surface_energies(regimes, material, constants, warnings, path=None):
    if material is None:
        return None, None, None
    from analysis.kinetics.materials import get_material

    mat = get_material(material, path=path)
    dhf, b0, a0 = mat.delta_hf_j_per_m3, mat.b0_m, mat.a0_m
    if dhf is None or b0 is None:
        warnings.append(f"material {mat.name} lacks dH0, rho_c or b0: no sigma*sigma_e")
        return None, None, None
    values = [sigma_sigma_e_from_kg(r.kg_k2, regime_factor(r.name), b0, dhf, constants.tm0_k)
              for r in regimes]
    product = float(np.mean(values))
    if a0 is None:
        return product, None, None
    sigma = thomas_stavely_sigma(dhf, a0, b0)
    sigma_e = product / sigma
    if not 0.020 <= sigma_e <= 0.200:
        warnings.append(f"sigma_e = {sigma_e * 1e3:.0f} mJ/m2 is outside the usual 20-200 mJ/m2")
    return product, sigma, sigma_e


def fit_lauritzen_hoffman(tc_c, g_um_per_min, ci95_um_per_min=None, *, constants: LHConstants,
                          detect_regimes: bool = True, material: str | None = None,
                          single_regime: str = "II", break_model: str = "continuous",
                          path=None) -> LHAnalysis:
    """Weighted LH fit of G(Tc), with optional automatic detection of one regime break.

    ``break_model``: "continuous" (two lines meeting at a free break temperature, 4
    parameters) or "free" (two independent lines split between two measured temperatures,
    5 parameters counting the split). ``single_regime`` names the regime assumed when one line suffices (sets n = 2 or 4 in
    sigma*sigma_e). Raises InputError for fewer than 3 temperatures, G <= 0 or Tc outside
    (T_inf, Tm0).
    """
    tc = np.asarray(tc_c, dtype=float)
    g = np.asarray(g_um_per_min, dtype=float)
    if tc.shape != g.shape or tc.ndim != 1 or tc.size < 3:
        raise InputError("need at least 3 (Tc, G) pairs for a Lauritzen-Hoffman fit", path)
    if np.any(~np.isfinite(g)) or np.any(g <= 0):
        raise InputError("growth rates must be positive numbers", path)
    if np.unique(tc).size < 3:
        raise InputError("need at least 3 distinct crystallization temperatures", path)
    w = _weights(g, ci95_um_per_min, path)
    x, y = lh_coordinates(tc, g, constants, path)
    absolute = ci95_um_per_min is not None
    overall, rss1 = _line_fit(x, y, w, tc, f"{single_regime} (assumed)", absolute)
    regimes, ratio, break_c, aicc1, aicc2 = (overall,), None, None, None, None
    if break_model not in ("continuous", "free"):
        raise InputError(f"break model must be continuous or free, got {break_model!r}", path)
    free = break_model == "free"
    k_two = 5 if free else 4
    best = None
    if detect_regimes and tc.size > k_two + 1:
        best = _best_free_split(tc, x, y, w) if free else _best_break(tc, x, y, w, constants)
    if best is not None:
        floor = 1e-20 * float(np.sum(w * (y - np.average(y, weights=w)) ** 2) + 1e-300)
        aicc1, aicc2 = _aicc(rss1, tc.size, 2, floor), _aicc(best[0], tc.size, k_two, floor)
        if aicc2 < aicc1:
            regimes = (_free_regimes(tc, x, y, w, best[1], absolute) if free else
                       _two_regimes(tc, x, y, w, constants, best[1], absolute))
            kgs = sorted(r.kg_k2 for r in regimes)
            ratio, break_c = kgs[1] / kgs[0], best[1]
    warnings = [f"Kg = {r.kg_k2:.3g} K^2 is outside the usual 1e4-2e6 K^2 ({r.name})"
                for r in regimes if not 1e4 <= r.kg_k2 <= 2e6]
    product, sigma, sigma_e = _surface_energies(regimes, material, constants, warnings, path)
    return LHAnalysis(constants, tc, g, None if ci95_um_per_min is None else np.asarray(
        ci95_um_per_min, dtype=float), overall, regimes, ratio, break_c, aicc1, aicc2,
        product, sigma, sigma_e, material, tuple(warnings))


def secondary_nucleation_dict(analysis: LHAnalysis) -> dict:
    """``secondary_nucleation.json`` (docs/design.md). Top-level Kg/G0: one line over all points."""
    c = analysis.constants
    return {
        "schema": 1, "u_star_j_per_mol": c.u_star_j_per_mol, "t_inf_c": c.t_inf,
        "tm0_c": c.tm0_c, "tg_c": c.tg_c, "kg_k2": analysis.overall.kg_k2,
        "kg_ci95": analysis.overall.kg_ci95, "g0_um_per_min": analysis.overall.g0_um_per_min,
        "regimes": [{"name": r.name, "t_low_c": r.t_low_c, "t_high_c": r.t_high_c,
                     "kg_k2": r.kg_k2, "g0_um_per_min": r.g0_um_per_min}
                    for r in analysis.regimes],
        "regime_ratio": analysis.regime_ratio,
        "sigma_sigma_e_j2_per_m4": analysis.sigma_sigma_e_j2_per_m4,
    }


def write_secondary_nucleation(analysis: LHAnalysis, out_dir) -> Path:
    with staged_outputs(out_dir) as stage:
        write_json_atomic(stage / "secondary_nucleation.json", secondary_nucleation_dict(analysis))
    return Path(out_dir) / "secondary_nucleation.json"


# ---------------------------------------------------------------- Hoffman-Weeks
@dataclass(frozen=True)
class HoffmanWeeks:
    tm0_c: float
    gamma: float
    slope: float
    intercept_c: float
    r2: float
    caveat: str = HW_CAVEAT


def hoffman_weeks(tc_c, tm_c) -> HoffmanWeeks | FitFailure:
    """Linear Hoffman-Weeks: Tm = a + b Tc, Tm0 = a / (1 - b), gamma = 1 / b (in deg C)."""
    tc, tm = np.asarray(tc_c, dtype=float), np.asarray(tm_c, dtype=float)
    if tc.shape != tm.shape or np.unique(tc).size < 2 or not np.all(np.isfinite(tc * tm)):
        return FitFailure("need at least two distinct, finite (Tc, Tm) pairs")
    fit = stats.linregress(tc, tm)
    b, a = float(fit.slope), float(fit.intercept)
    if not 0.0 < b < 1.0:
        return FitFailure(f"slope b = {b:.3g} outside (0, 1): the line does not cross Tm = Tc "
                          "usefully")
    r2 = float(fit.rvalue ** 2) if np.isfinite(fit.rvalue) else 1.0
    return HoffmanWeeks(a / (1.0 - b), 1.0 / b, b, a, r2)


# ---------------------------------------------------------------- growth-rate table
@dataclass(frozen=True)
class GrowthTable:
    path: str
    temperature_c: np.ndarray
    growth_rate_um_per_min: np.ndarray
    ci95_um_per_min: np.ndarray | None


def _table_rows(path):
    """(line number, line, fields) of the non-comment lines, every row as wide as the header."""
    text = read_text(path, "growth-rate table").lstrip("\ufeff")
    lines = [(number, line) for number, line in enumerate(text.splitlines(), start=1)
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise InputError("growth-rate table is empty", path)
    delimiter = max((",", ";", "\t"), key=lines[0][1].count)
    rows = [(number, line, [f.strip() for f in split_fields(line, delimiter, line_no=number,
                                                            path=path, quoted=True)])
            for number, line in lines]
    width = len(rows[0][2])
    for number, line, fields in rows[1:]:
        check_field_count(fields, width, line_no=number, line=line, path=path, delimiter=delimiter)
    return rows, delimiter


def _table_number(text: str, delimiter: str) -> float:
    """A number; with ';' or tab delimiters a decimal comma is accepted (``14,6``)."""
    if delimiter != "," and "," in text and "." not in text:
        text = text.replace(",", ".")
    return float(text)


def read_growth_table(path) -> GrowthTable:
    """CSV with columns temperature_c, growth_rate_um_per_min[, ci95_um_per_min].

    Comma, semicolon or tab delimited; every row must have as many fields as the header
    (see :mod:`analysis.textio`), so a decimal comma in a comma-separated file is an error
    naming the line instead of shifted columns.
    """
    rows, delimiter = _table_rows(path)
    names = rows[0][2]
    header = [h.casefold() for h in names]
    needed = ("temperature_c", "growth_rate_um_per_min")
    missing = [name for name in needed if name not in header]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}; header is "
                         f"{excerpt(', '.join(names))}", path)
    cols = [header.index(n) for n in needed]
    if "ci95_um_per_min" in header:
        cols.append(header.index("ci95_um_per_min"))
    values = []
    for line_no, line, row in rows[1:]:
        try:
            values.append([_table_number(row[c], delimiter) for c in cols])
        except ValueError:
            raise InputError(f"line {line_no}: expected numbers in "
                             f"{', '.join(names[c] for c in cols)}: {excerpt(line.strip())}",
                             path) from None
        if not all(math.isfinite(v) for v in values[-1]):
            raise InputError(f"line {line_no}: NaN or infinite value", path)
    data = np.asarray(values, dtype=float).reshape(-1, len(cols))
    if data.shape[0] < 3:
        raise InputError(f"only {data.shape[0]} data rows; need at least 3 temperatures", path)
    if np.any(data[:, 1] <= 0):
        raise InputError("growth rates must be positive", path)
    ci = None
    if len(cols) == 3:
        ci = data[:, 2]
        if np.any(ci <= 0):
            raise InputError("ci95_um_per_min must be positive", path)
    return GrowthTable(str(path), data[:, 0], data[:, 1], ci)
