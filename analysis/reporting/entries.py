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

from dataclasses import replace

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.lauritzen_hoffman import LHConstants
from analysis.outputs import clean_text
from analysis.reporting.tables import ReportEntry

__all__ = ["RAMP_POINT_STEP_K", "calorimetry_source", "experiment_calorimetry", "experiment_entry",
           "lauritzen_hoffman_inputs", "lauritzen_hoffman_sources", "material_for", "report_entry",
           "series_constants"]


def _analyze_source(source):
    from analysis.kinetics.calorimetry import analyze_source

    return analyze_source(source)


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
                     calorimetry_problem: str | None = None, ramp=None) -> ReportEntry:
    """The entry of an analysed experiment: its name (control characters removed), result,
    the experiment's geometry, mode override, Tc and film thickness (the result's where the
    experiment sets none), and the given calorimetry result."""
    return ReportEntry(clean_text(experiment.name), result, experiment.geometry, experiment.mode_override,
                       calorimetry, calorimetry_problem, temperature_c=experiment.temperature_c,
                       thickness_um=experiment.thickness_um, ramp=ramp)


def report_entry(experiment, result, project_material: str | None, analyze=None) -> ReportEntry:
    """:func:`experiment_entry` with the experiment's calorimetry analysed
    (:func:`experiment_calorimetry`)."""
    calorimetry, problem = experiment_calorimetry(experiment, project_material, analyze)
    return experiment_entry(experiment, result, calorimetry, problem)


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
    """(Tc, G, half-width or None, source) of every point the Tc-series fit takes."""
    from analysis.kinetics.ramp import ramp_points

    rows = [(e.temperature_c, e.result.growth_rate.value, e.growth_rate_ci95_half_width, "isothermal")
            for e in entries if e.ramp is None and e.temperature_c is not None and e.result.growth_rate.value]
    for e in entries:
        if include_ramps and e.ramp is not None and e.ramp.growth:
            rows += [(float(t), float(g), float(h), f"ramp: {e.name}")
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
