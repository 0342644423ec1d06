"""One experiment's report entry, its calorimetry and the series constants, built once.

The command line (``spherokin report``), the report the application writes, its
growth-rate table, the Kinetics page and the Tc-series page all build their
:class:`~analysis.reporting.tables.ReportEntry` objects, their calorimetry results and
their Lauritzen-Hoffman inputs and constants through these functions, so every place
shows the same numbers.

Public API
----------
``material_for(experiment, project_material)``: the material whose calorimetry constants
    apply (the DSC run's own, else the project's).
``calorimetry_source(experiment, project_material)``: the run with that material filled in.
``experiment_calorimetry(experiment, project_material, analyze=analyze_source)``:
    (CalorimetryResult or None, problem or None); ``analyze`` may be a cache.
``experiment_entry(experiment, result, calorimetry=None, calorimetry_problem=None)`` and
``report_entry(experiment, result, project_material, analyze=analyze_source) -> ReportEntry``
``series_constants(series, material) -> (LHConstants | None, note)``
``lauritzen_hoffman_inputs(entries) -> (tc_c, g_um_per_min, ci95_um_per_min or None)``
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.lauritzen_hoffman import LHConstants
from analysis.kinetics.lh_intervals import fit_with_temperature, lh_intervals
from analysis.outputs import clean_text
from analysis.reporting.tables import ReportEntry
from analysis.settings import DEFAULT_STAGE_UNCERTAINTY_K

__all__ = ["RAMP_POINT_STEP_K", "SeriesFit", "calorimetry_source", "experiment_calorimetry",
           "experiment_entry", "lauritzen_hoffman_inputs", "lauritzen_hoffman_series",
           "lauritzen_hoffman_sources", "material_for", "report_entry", "series_constants",
           "stage_uncertainties"]


def _analyze_source(source, seed: int = DEFAULT_SEED):
    from analysis.kinetics.calorimetry import analyze_source

    return analyze_source(source, seed=seed)


def material_for(experiment, project_material: str | None) -> str | None:
    """The DSC run's own material, else the project's (None when neither is set)."""
    source = experiment.calorimetry
    own = source.material if source is not None else None
    return own or project_material or None


def calorimetry_source(experiment, project_material: str | None):
    """The experiment's calorimetry source with :func:`material_for` filled in, or None."""
    source = experiment.calorimetry
    if source is None:
        return None
    material = material_for(experiment, project_material)
    return source if source.material == material else replace(source, material=material)


def experiment_calorimetry(experiment, project_material: str | None, analyze=None):
    """(CalorimetryResult or None, the problem in one line or None) for one experiment.

    ``analyze(source)`` defaults to ``analysis.kinetics.calorimetry.analyze_source``; the
    application passes its cache. Bad input becomes the problem, never an exception.
    """
    source = calorimetry_source(experiment, project_material)
    if source is None:
        return None, None
    try:
        return (analyze or _analyze_source)(source), None
    except InputError as error:
        return None, str(error)


def experiment_entry(experiment, result, calorimetry=None,
                     calorimetry_problem: str | None = None, ramp=None, *,
                     stage_uncertainty_k: float | None = None,
                     seed: int = DEFAULT_SEED) -> ReportEntry:
    """The entry of an analysed experiment: its name (control characters removed), result,
    the experiment's geometry, mode override, Tc and film thickness (the result's where the
    experiment sets none), and the given calorimetry result. ``stage_uncertainty_k``: the
    project's value for this experiment (``analysis.project.model.stage_uncertainty_k``;
    None: the experiment's own or the default); ``seed``: of its resampling."""
    if stage_uncertainty_k is None:
        stage_uncertainty_k = (experiment.stage_uncertainty_k if experiment.stage_uncertainty_k
                               is not None else DEFAULT_STAGE_UNCERTAINTY_K)
    return ReportEntry(clean_text(experiment.name), result, experiment.geometry, experiment.mode_override,
                       calorimetry, calorimetry_problem, temperature_c=experiment.temperature_c,
                       thickness_um=experiment.thickness_um, ramp=ramp,
                       stage_uncertainty_k=float(stage_uncertainty_k), seed=seed)


def report_entry(experiment, result, project_material: str | None, analyze=None, *,
                 stage_uncertainty_k: float | None = None, seed: int = DEFAULT_SEED) -> ReportEntry:
    """:func:`experiment_entry` with the experiment's calorimetry analysed
    (:func:`experiment_calorimetry`, resampled with ``seed``)."""
    analyze = analyze or (lambda source: _analyze_source(source, seed))
    calorimetry, problem = experiment_calorimetry(experiment, project_material, analyze)
    return experiment_entry(experiment, result, calorimetry, problem,
                            stage_uncertainty_k=stage_uncertainty_k, seed=seed)


def series_constants(series: dict | None, material: str | None, path=None) -> tuple[LHConstants | None, str]:
    """Lauritzen-Hoffman constants from the project's series settings (``tm0_c``, ``tg_c``,
    ``u_star_j_per_mol``, ``t_inf_c``), Tm0 and Tg completed from the material table.

    Returns (None, the reason) when Tm0 or Tg stays unknown; an unknown material is an
    :class:`InputError` naming ``path`` (the project file). U* and the T∞ rule default to
    :class:`~analysis.kinetics.lauritzen_hoffman.LHConstants`'s.
    """
    series = dict(series or {})
    tm0, tg = series.get("tm0_c"), series.get("tg_c")
    note = "Tm0 and Tg from the project"
    if (tm0 is None or tg is None) and material:
        from analysis.kinetics.materials import get_material

        entry = get_material(material, path=path)
        tm0 = entry.tm0_c if tm0 is None else tm0
        tg = entry.tg_c if tg is None else tg
        if tm0 is not None and tg is not None:
            note = f"Tm0 = {tm0:g} °C and Tg = {tg:g} °C (material table entry {entry.name} where not set)"
    if tm0 is None or tg is None:
        missing = " and ".join(name for name, value in (("Tm0", tm0), ("Tg", tg)) if value is None)
        return None, f"no {missing}: set them for the series or choose a material"
    optional = {key: float(series[key]) for key in ("u_star_j_per_mol", "t_inf_c")
                if series.get(key) is not None}
    return LHConstants(float(tm0), float(tg), **optional), note


#: Spacing of the points a ramp's smooth G(T) gives the Tc-series fit, K.
RAMP_POINT_STEP_K = 2.0


def _lh_rows(entries, include_ramps: bool) -> list[tuple]:
    """(Tc, G, half-width or None, source, u_T in K) of every point the Tc-series fit takes."""
    from analysis.kinetics.ramp import ramp_points

    rows = [(e.temperature_c, e.result.growth_rate.value, e.growth_rate_ci95_half_width, "isothermal",
             getattr(e, "stage_uncertainty_k", DEFAULT_STAGE_UNCERTAINTY_K))
            for e in entries if e.ramp is None and e.temperature_c is not None and e.result.growth_rate.value]
    for e in entries:
        if include_ramps and e.ramp is not None and e.ramp.growth:
            rows += [(float(t), float(g), float(h), f"ramp: {e.name}",
                      getattr(e, "stage_uncertainty_k", DEFAULT_STAGE_UNCERTAINTY_K))
                     for t, g, h in zip(*ramp_points(e.ramp.growth, step_k=RAMP_POINT_STEP_K))]
    return rows


def lauritzen_hoffman_inputs(entries, *, include_ramps: bool = False
                             ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Tc (°C), pooled G (µm/min) and its 95 % half-width of the isothermal entries that have
    both a temperature and a positive G; the half-widths are None unless every one is known
    and positive (the fit is then weighted by them). With ``include_ramps`` every ramp
    entry's smooth G(T) adds a point every RAMP_POINT_STEP_K kelvin (its band's half-width);
    those points are not independent of each other (one smooth curve)."""
    rows = _lh_rows(entries, include_ramps)
    tc = np.array([r[0] for r in rows], dtype=float)
    g = np.array([r[1] for r in rows], dtype=float)
    half = [r[2] for r in rows]
    ci = None if any(h is None or h <= 0 for h in half) else np.array(half, dtype=float)
    return tc, g, ci


def lauritzen_hoffman_sources(entries, *, include_ramps: bool = False) -> list[str]:
    """Where each point of :func:`lauritzen_hoffman_inputs` comes from ("isothermal" or
    "ramp: <experiment>"), in the same order."""
    return [r[3] for r in _lh_rows(entries, include_ramps)]


def stage_uncertainties(entries, *, include_ramps: bool = False) -> np.ndarray:
    """Stage-temperature uncertainty u_T (K) of each point of :func:`lauritzen_hoffman_inputs`,
    in the same order (a ramp's points take their experiment's)."""
    return np.array([r[4] for r in _lh_rows(entries, include_ramps)], dtype=float)


@dataclass(frozen=True)
class SeriesFit:
    """The Lauritzen-Hoffman fit of a series and its bootstrap intervals."""

    fit: object  # lauritzen_hoffman.LHAnalysis
    intervals: object  # lh_intervals.LHIntervals


def lauritzen_hoffman_series(entries, constants, material=None, *, seed: int = DEFAULT_SEED,
                             include_ramps: bool = False,
                             problems: list | None = None) -> SeriesFit | None:
    """The LH fit of a series with its intervals: weighted by G's CI with the
    stage-temperature part (lh_intervals.fit_with_temperature), intervals on Kg, G0,
    sigma*sigma_e, sigma_e and the break. None (and a line in ``problems``) when it
    cannot be made."""
    problems = problems if problems is not None else []
    if constants is None:
        problems.append("Lauritzen-Hoffman fit skipped: no Tm0 and Tg for the series")
        return None
    tc, g, ci = lauritzen_hoffman_inputs(entries, include_ramps=include_ramps)
    u_t = stage_uncertainties(entries, include_ramps=include_ramps)
    if np.unique(tc).size < 3:
        problems.append("Lauritzen-Hoffman fit skipped: fewer than 3 temperatures with a growth rate")
        return None
    try:
        lh = fit_with_temperature(tc, g, ci, u_t, constants=constants, material=material)
    except InputError as err:
        problems.append(f"Lauritzen-Hoffman fit skipped: {err}")
        return None
    problems.extend(lh.warnings)
    return SeriesFit(lh, lh_intervals(lh, ci, u_t, seed=seed))
