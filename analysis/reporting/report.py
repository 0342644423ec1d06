"""``spherokin report``: tables, fits and figures for a whole project.

Public API
----------
``build_report(entries, out_dir, *, constants=None, material=None) -> ReportSummary``
    From ready ``tables.ReportEntry`` objects (no image analysis): writes
    ``growth_vs_temperature.csv``/``.xlsx`` (sheets: growth_vs_temperature,
    kinetics_comparison), ``kinetics_comparison.csv``, ``secondary_nucleation.json`` (when
    constants and at least 3 temperatures are available) and the figures
    ``growth_rate_vs_temperature``, ``lauritzen_hoffman``, ``avrami_microscopy``,
    ``avrami_calorimetry``, ``conversion_comparison`` (each .png and .svg); with
    ``hoffman_weeks_pairs`` also ``hoffman_weeks.json`` and its figure.
``project_entries_iter(project) -> Generator[Progress, None, (entries, problems)]``
    Analyses every experiment (``pipeline.analyze_experiment_iter``) and its calorimetry.
``report_project_iter(project, out_dir)`` / ``report_project(project, out_dir)``
Entries, their calorimetry, the Lauritzen-Hoffman inputs and the series constants come
from ``analysis.reporting.entries``, which the application's pages use too.
``add_cli_arguments(parser)`` / ``run_cli(args)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED
from analysis.outputs import file_stem, prepare_output_folder, staged_outputs
from analysis.project.model import resampling_seed, stage_uncertainty_k
from analysis.kinetics.lauritzen_hoffman import (
    LHConstants,
    hoffman_weeks,
    write_secondary_nucleation,
)
from analysis.progress import Progress, run_to_completion, scaled
from analysis.settings import HW_PAIRS_KEY

#: Series flag that adds the ramps' G(T) to the Lauritzen-Hoffman fit.
RAMPS_IN_LH_KEY = "lh_include_ramps"
from analysis.reporting import figures
from analysis.kinetics.prediction import film_avrami_fit, film_conversion
from analysis.reporting.entries import (
    lauritzen_hoffman_series,
    lauritzen_hoffman_sources,
    report_entry,
    series_constants,
)
from analysis.reporting.tables import (
    Table,
    comparison_table,
    growth_vs_temperature_table,
    write_csv,
    write_xlsx,
)
from analysis.units import write_json_atomic

__all__ = ["HW_PAIRS_KEY", "RAMPS_IN_LH_KEY", "ramp_of_experiment", "ReportSummary", "build_report", "checked_hoffman_weeks_pairs",
           "project_entries_iter", "report_project", "report_project_iter"]


@dataclass(frozen=True)
class ReportSummary:
    out_dir: str
    files: tuple[str, ...]
    lauritzen_hoffman: object | None = None  # temperature_series.LHAnalysis
    problems: tuple[str, ...] = field(default=())


def _lauritzen_hoffman(entries, constants, material, problems, include_ramps=False):
    """The series fit and its intervals (reporting.entries.lauritzen_hoffman_series)."""
    seed = entries[0].seed if entries else DEFAULT_SEED
    return lauritzen_hoffman_series(entries, constants, material, seed=seed,
                                    include_ramps=include_ramps, problems=problems)


def _avrami_curves(entries):
    micro, dsc = [], []
    for e in entries:
        label = f"{e.temperature_c:g} °C" if e.temperature_c is not None else e.name
        if e.result.area_fraction.size:
            micro.append(figures.AvramiCurve(label, *film_conversion(e.result),
                                             film_avrami_fit(e.result)))
        if e.calorimetry is not None:
            t, x = e.calorimetry.conversion_table()
            dsc.append(figures.AvramiCurve(label, t - e.calorimetry.induction_time_min, x,
                                           e.calorimetry.avrami))
    return micro, dsc


def _write_figures(entries, lh, out: Path, sources=None) -> list[Path]:
    micro, dsc = _avrami_curves(entries)
    made = [
        ("growth_rate_vs_temperature", figures.growth_rate_figure(entries)),
        ("avrami_microscopy", figures.avrami_figure(micro, "Microscopy (area fraction)")),
        ("avrami_calorimetry", figures.avrami_figure(dsc, "Calorimetry")),
        ("conversion_comparison", figures.conversion_comparison_figure(entries)),
    ]
    if lh is not None:
        made.append(("lauritzen_hoffman", figures.lauritzen_hoffman_figure(lh, sources)))
    paths = []
    for stem, fig in made:
        paths.extend(figures.save_figure(fig, out / stem))
    return paths


def _hoffman_weeks(pairs, out: Path, problems: list) -> list[Path]:
    """``hoffman_weeks.json`` and its figure from (Tc, Tm) pairs in deg C, if there are any."""
    pairs = checked_hoffman_weeks_pairs(pairs)
    if not pairs:
        return []
    tc, tm = (np.array(v, dtype=float) for v in zip(*pairs))
    hw = hoffman_weeks(tc, tm)
    if not hw:
        problems.append(f"Hoffman-Weeks skipped: {hw.reason}")
        return []
    doc = {"schema": 1, "pairs": [[float(a), float(b)] for a, b in zip(tc, tm)],
           "tm0_c": hw.tm0_c, "gamma": hw.gamma, "slope": hw.slope,
           "intercept_c": hw.intercept_c, "r2": hw.r2, "caveat": hw.caveat}
    path = write_json_atomic(out / "hoffman_weeks.json", doc)
    return [path, *figures.save_figure(figures.hoffman_weeks_figure(tc, tm, hw),
                                       out / "hoffman_weeks")]


def build_report(entries, out_dir, *, constants: LHConstants | None = None,
                 material: str | None = None, problems=(),
                 hoffman_weeks_pairs=None, include_ramps: bool = False) -> ReportSummary:
    """Write every table, fit and figure for ready entries (see module doc).

    ``hoffman_weeks_pairs``: optional [(Tc, Tm), ...] in deg C for ``hoffman_weeks.json``.
    Entries of ramp experiments write their own files, prefixed ``ramp_<name>_``; with
    ``include_ramps`` their G(T) also enters the Lauritzen-Hoffman fit (points listed with
    their source in ``lauritzen_hoffman_points.csv``).
    """
    entries = list(entries)
    if not entries:
        raise InputError("the project has no analysable experiment; nothing to report")
    with staged_outputs(out_dir) as stage:
        files, lh, problems = _write_report_files(entries, stage, constants, material,
                                                  list(problems), hoffman_weeks_pairs, include_ramps)
    out = Path(out_dir)
    return ReportSummary(str(out), tuple(str(out / Path(f).name) for f in files), lh, tuple(problems))


def _write_report_files(entries, out: Path, constants, material, problems, hoffman_weeks_pairs,
                        include_ramps=False):
    files = _write_ramps(entries, out)
    series = _lauritzen_hoffman(entries, constants, material, problems, include_ramps)
    lh = None if series is None else series.fit
    sources = lauritzen_hoffman_sources(entries, include_ramps=include_ramps)
    entries = [e for e in entries if e.ramp is None]  # a ramp has no single Tc for these tables
    growth, comparison = growth_vs_temperature_table(entries), comparison_table(entries)
    files += [write_csv(growth, out / "growth_vs_temperature.csv"),
              write_csv(comparison, out / "kinetics_comparison.csv"),
              write_xlsx({"growth_vs_temperature": growth, "kinetics_comparison": comparison},
                         out / "growth_vs_temperature.xlsx")]
    if lh is not None:
        files.append(write_secondary_nucleation(lh, out, series.intervals))
        if include_ramps:
            files.append(write_csv(_lh_points_table(lh, sources), out / "lauritzen_hoffman_points.csv"))
    files.extend(_write_figures(entries, lh, out, sources))
    files.extend(_hoffman_weeks(hoffman_weeks_pairs, out, problems))
    return files, lh, problems


def _lh_points_table(lh, sources) -> Table:
    """The points of the Tc-series fit with their source (isothermal or which ramp)."""
    ci = lh.ci95_um_per_min if lh.ci95_um_per_min is not None else [None] * len(lh.tc_c)
    rows = [[float(t), float(g), None if c is None else float(c), src]
            for t, g, c, src in zip(lh.tc_c, lh.g_um_per_min, ci, sources)]
    return Table(["temperature_c", "growth_rate_um_per_min", "ci95_um_per_min", "source"], rows)


def _write_ramps(entries, out: Path) -> list[Path]:
    """Each ramp experiment's G(T), N(T), ramp.json and figures, prefixed by its name."""
    from analysis.reporting.ramp_outputs import write_ramp_outputs

    files = []
    for e in entries:
        if e.ramp is not None:
            prefix = f"ramp_{file_stem(e.name)}_"
            files += [out / name for name in write_ramp_outputs(e.ramp, out, prefix=prefix)]
    return files



def ramp_of_experiment(experiment, analysis, project):
    """The ramp analysis of an experiment of kind "ramp" (InputError without a usable
    temperature source); the series' LH constants give the direct Kg fit."""
    from analysis.kinetics.ramp import analyze_ramp
    from analysis.kinetics.temperature_programme import programme_of_source

    if experiment.temperature_source is None:
        raise InputError("a ramp experiment needs a temperature log or a typed programme")
    constants, _ = series_constants(project.series, project.material, project.path)
    return analyze_ramp(analysis, programme_of_source(experiment.temperature_source), constants=constants,
                        time_offset_s=experiment.isothermal_start_s or 0.0)


def project_entries_iter(project):
    """Analyse every experiment; returns (entries, problems). Bad experiments are skipped."""
    from analysis.spherulites.pipeline import analyze_experiment_iter

    entries, problems = [], []
    count = max(1, len(project.experiments))
    for i, exp in enumerate(project.experiments):
        yield Progress("analysing experiments", i / count, exp.name)
        try:
            analysis = yield from scaled(analyze_experiment_iter(exp), i / count, (i + 0.9) / count)
        except InputError as err:
            problems.append(f"{exp.name}: skipped ({err})")
            continue
        entry = report_entry(exp, analysis.result, project.material,
                             stage_uncertainty_k=stage_uncertainty_k(project, exp),
                             seed=resampling_seed(project))
        if exp.kind == "ramp":
            try:
                entry = replace(entry, ramp=ramp_of_experiment(exp, analysis, project))
            except InputError as err:
                problems.append(f"{exp.name}: skipped ({err})")
                continue
        if entry.calorimetry_problem:
            problems.append(f"{exp.name}: calorimetry skipped ({entry.calorimetry_problem})")
        entries.append(entry)
    yield Progress("analysing experiments", 1.0)
    return entries, problems


def checked_hoffman_weeks_pairs(pairs, path=None) -> list[tuple[float, float]]:
    """(Tc, Tm) pairs in deg C from the project series; InputError naming the file if malformed."""
    if pairs is None:
        return []
    if not isinstance(pairs, (list, tuple)):
        raise InputError(f"series {HW_PAIRS_KEY} must be a list of [Tc, Tm] pairs", path)
    checked = []
    for number, pair in enumerate(pairs, start=1):
        if pair is None or (isinstance(pair, (list, tuple)) and None in pair):
            continue  # a row the user has not filled in yet
        if (not isinstance(pair, (list, tuple)) or len(pair) != 2
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in pair)
                or not all(math.isfinite(v) for v in pair)):
            raise InputError(f"series {HW_PAIRS_KEY} entry {number} must be two finite numbers "
                             f"[Tc, Tm] in C, got {str(pair)[:40]}", path)
        checked.append((float(pair[0]), float(pair[1])))
    return checked


def report_project_iter(project, out_dir):
    """Check the output folder and the series first, then analyse and write the report."""
    prepare_output_folder(out_dir)
    pairs = checked_hoffman_weeks_pairs((project.series or {}).get(HW_PAIRS_KEY), project.path)
    # an unknown material stops here, before the long analysis
    constants, note = series_constants(project.series, project.material, project.path)
    entries, problems = yield from scaled(project_entries_iter(project), 0.0, 0.9)
    if not entries:
        reasons = "; ".join(problems[:3]) or "it has no experiments"
        raise InputError(f"no experiment could be analysed, nothing to report ({reasons})",
                         project.path)
    yield Progress("writing report", 0.9, note)
    summary = build_report(entries, out_dir, constants=constants, material=project.material,
                           problems=problems,
                           hoffman_weeks_pairs=pairs,
                           include_ramps=bool((project.series or {}).get(RAMPS_IN_LH_KEY, False)))
    yield Progress("writing report", 1.0)
    return summary


def report_project(project, out_dir) -> ReportSummary:
    return run_to_completion(report_project_iter(project, out_dir))
