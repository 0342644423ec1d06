"""The kinetics view driven like a user would: import an isotherm through the mapping
dialog, drag the fit window and the baseline, change geometry and mode, undo, export.

The microscopy result is built by hand (one experiment whose N and G are known) so the
test does not depend on the image pipeline; the isotherm is simulated with the same N_V
and G, so prediction and calorimetry must agree.
"""

from __future__ import annotations

import dataclasses
import gc
import math

import numpy as np
import pytest
from PySide6 import QtWidgets

from analysis.project.file import Experiment, Project
from analysis.results import ExperimentResult, Nucleation, PooledGrowthRate
from analysis.synthetic.dsc import simulate_dsc_isotherm, write_dsc_csv
from app.core.model import ProjectModel
from app.kinetics.view import KineticsView

N_A_PER_MM2, THICKNESS_UM, G_UM_PER_MIN = 400.0, 20.0, 10.0
N_V_PER_MM3 = N_A_PER_MM2 / (THICKNESS_UM * 1e-3)  # 2e4 mm^-3


@pytest.fixture(autouse=True)
def _collect_qt_garbage():
    """Collect reference cycles (views <-> model signals) while the QApplication still exists."""
    yield
    gc.collect()


@dataclasses.dataclass(frozen=True)
class HandMadeAnalysis:
    """Stands in for analysis.spherulites.pipeline.Analysis: the model only reads ``.result``."""

    result: ExperimentResult


def hand_made_result(temperature_c=128.0, g=G_UM_PER_MIN, n_a=N_A_PER_MM2, count=40, mode="athermal"):
    t_s = np.arange(0.0, 600.0, 30.0)
    k_film = math.pi * n_a * (g * 1e-3) ** 2
    return ExperimentResult(
        stack=f"/data/run_{temperature_c:g}.tif", frames=t_s.size, um_per_px=1.2, interval_s=30.0,
        temperature_c=temperature_c, thickness_um=THICKNESS_UM, spherulites=(), radii=(),
        growth_rate=PooledGrowthRate(g, 0.95 * g, 1.05 * g, 25),
        nucleation=Nucleation(count=count, mode=mode, density_per_mm2=n_a, density_per_mm3=None,
                              rate_per_mm2_per_min=None, rate_per_mm3_per_min=None, induction_time_s=0.0),
        area_fraction_time_s=t_s, area_fraction=-np.expm1(-k_film * (t_s / 60) ** 2))


def model_with(results, tmp_path) -> ProjectModel:
    experiments = tuple(Experiment(name=f"run {r.temperature_c:g} C", stack_path=r.stack,
                                   temperature_c=r.temperature_c, thickness_um=THICKNESS_UM)
                        for r in results)
    model = ProjectModel(Project(experiments=experiments, material="iPP"))
    for i, r in enumerate(results):
        model.set_analysis(i, HandMadeAnalysis(r), experiments[i])
    return model


@pytest.fixture(scope="module")
def isotherm_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("dsc") / "isotherm_128C.csv"
    run = simulate_dsc_isotherm(n_v_per_mm3=N_V_PER_MM3, growth_rate_um_per_min=G_UM_PER_MIN, seed=5)
    write_dsc_csv(run, path, temperature_c=128.0)
    return str(path), run


@pytest.fixture
def view(qtbot, tmp_path):
    model = model_with([hand_made_result()], tmp_path)
    widget = KineticsView(model)
    qtbot.addWidget(widget)
    widget.resize(1400, 900)
    widget.show()
    return widget


def _import(view, path):
    dialog = view.mapping_dialog(path)
    dialog.accept()
    assert view.map_and_store(path, dialog)


def test_prediction_from_microscopy(view):
    values = view.prediction.form
    # 3-D athermal: k = (4 pi/3) N_V G^3 (Avrami 1940, J. Chem. Phys. 8, 212; from memory)
    k = 4 * math.pi / 3 * N_V_PER_MM3 * (G_UM_PER_MIN * 1e-3) ** 3
    assert values.text("n") == "3"
    assert values.text("k").startswith(f"{k:.3g}")
    assert values.text("t_half").startswith(f"{(math.log(2) / k) ** (1 / 3):.3g}")
    assert "4π/3" in view.prediction.formula.text() and "ln 2" in view.prediction.formula.text()
    assert values.text("thickness") == "20 µm"


def test_geometry_and_mode_are_undoable(view):
    model = view.model
    view.geometry.setCurrentIndex(view.geometry.findData("film-2d"))
    view.geometry.activated.emit(view.geometry.currentIndex())
    assert model.experiment(0).geometry == "film-2d"
    assert view.prediction.form.text("n") == "2"  # 2-D athermal discs
    view.mode.setCurrentIndex(view.mode.findData("thermal"))
    view.mode.activated.emit(view.mode.currentIndex())
    assert "missing nucleation rate" in view.prediction.problem.text()
    assert model.undo_stack.count() == 2
    model.undo_stack.undo()
    model.undo_stack.undo()
    assert model.experiment(0).geometry == "bulk-3d" and view.prediction.form.text("n") == "3"


def test_import_isotherm_fit_window_and_undo(view, isotherm_csv):
    path, run = isotherm_csv
    _import(view, path)
    model, panel = view.model, view.calorimetry_panel.form
    assert model.undo_stack.count() == 1
    assert model.experiment(0).calorimetry.file == path
    n_default = float(panel.text("n").split()[0])
    assert n_default == pytest.approx(run.n, abs=0.1)  # simulated athermal bulk: n = 3
    before = {key: panel.text(key) for key in ("window", "n", "k", "r2")}
    # drag the shaded window to 10-60 % conversion: one gesture, one undo entry
    from app.kinetics.plots import x_to_avrami_y

    view.plots.window_region.setRegion((x_to_avrami_y(0.10), x_to_avrami_y(0.60)))
    assert model.undo_stack.count() == 2
    lo, hi = model.experiment(0).calorimetry.window
    assert lo == pytest.approx(0.10, abs=1e-3) and hi == pytest.approx(0.60, abs=1e-3)
    after = {key: panel.text(key) for key in before}
    assert after["window"] != before["window"] and after["n"] != before["n"]
    model.undo_stack.undo()
    assert {key: panel.text(key) for key in before} == before
    model.undo_stack.redo()
    assert panel.text("n") == after["n"]


def test_baseline_drag_is_one_undo_entry(view, isotherm_csv):
    path, _run = isotherm_csv
    _import(view, path)
    model = view.model
    start, end = view.plots.baseline_region.getRegion()
    enthalpy = view.calorimetry_panel.form.text("enthalpy")
    view.plots.baseline_region.setRegion((start, end - 1.0))
    assert model.undo_stack.count() == 2
    source = model.experiment(0).calorimetry
    assert source.baseline_end_min == pytest.approx(end - 1.0, abs=0.05)
    assert "manual" in view.calorimetry_panel.form.text("file")
    model.undo_stack.undo()
    assert model.experiment(0).calorimetry.baseline_end_min is None
    assert view.calorimetry_panel.form.text("enthalpy") == enthalpy


def _settle(view, qtbot):
    """Wait until the intervals computed in the worker have arrived."""
    qtbot.waitUntil(lambda: not (view.intervals_job.running or view.calorimetry_job.running),
                    timeout=60_000)


def test_comparison_agrees_for_matching_kinetics(view, isotherm_csv, qtbot):
    path, _run = isotherm_csv
    _import(view, path)
    # the calorimetry intervals come from the worker; the verdict waits for them
    assert view.calorimetry_job.running and "waiting" in view.comparison.note.text()
    assert "95 % CI" not in view.calorimetry_panel.form.text("n")
    _settle(view, qtbot)
    assert "95 % CI" in view.calorimetry_panel.form.text("n")
    assert view.comparison.note.text().startswith("Agree.")
    assert "volume basis" in view.comparison.note.text()
    ratio = float(view.comparison.cell(2, 2).split()[0])
    assert ratio == pytest.approx(1.0, abs=0.1)
    t, x = view.plots.measured_curve.getData()
    assert t.size > 10 and 0.9 < x.max() <= 1.0


def test_comparison_flags_a_tenfold_density(qtbot, tmp_path, isotherm_csv):
    path, _run = isotherm_csv
    model = model_with([hand_made_result(n_a=10 * N_A_PER_MM2)], tmp_path)
    view = KineticsView(model)
    qtbot.addWidget(view)
    view.show()
    _import(view, path)
    _settle(view, qtbot)
    note = view.comparison.note.text()
    assert "beyond the uncertainty" in note and "slower than predicted" in note


def test_export_all_figures(view, isotherm_csv, tmp_path):
    _import(view, isotherm_csv[0])
    written = view.export_figures(str(tmp_path))
    assert len(written) == 8
    assert all((tmp_path / name).stat().st_size > 1000 for name in map(lambda p: p.split("/")[-1], written))


def test_live_drag_updates_numbers_without_an_undo_entry(view, isotherm_csv):
    from app.kinetics.plots import x_to_avrami_y

    _import(view, isotherm_csv[0])
    model, panel = view.model, view.calorimetry_panel.form
    shown = lambda: (panel.text("window"), panel.text("k"))  # noqa: E731
    before = shown()
    region = view.plots.window_region
    region.setRegion((x_to_avrami_y(0.3), x_to_avrami_y(0.8)))  # a finished gesture
    after = shown()
    model.undo_stack.undo()
    # mid-gesture: the drag reports positions before it ends; only the end pushes a command
    view.plots.window_dragging.emit(0.3, 0.8)
    assert shown() == after and model.undo_stack.count() == 2 and model.undo_stack.index() == 1
    view.plots.window_dragged.emit(0.3, 0.8)
    assert model.undo_stack.index() == 2 and shown() == after != before


def test_baseline_not_bracketing_the_peak_is_refused(view, isotherm_csv, monkeypatch):
    warnings = []
    monkeypatch.setattr(QtWidgets.QMessageBox, "warning", lambda *args: warnings.append(args[2]))
    _import(view, isotherm_csv[0])
    start, end = view.plots.baseline_region.getRegion()
    view.plots.baseline_region.setRegion((start, start + 0.1))
    assert warnings and "isotherm_128C.csv" in warnings[0]
    assert view.model.undo_stack.count() == 1  # nothing stored
    assert view.model.experiment(0).calorimetry.baseline_end_min is None
    assert view.plots.baseline_region.getRegion() == pytest.approx((start, end))


def test_unreadable_isotherm_is_reported_in_a_dialog(view, tmp_path, monkeypatch):
    errors = []
    monkeypatch.setattr(QtWidgets.QMessageBox, "critical", lambda *args: errors.append(args[2]))
    bad = tmp_path / "broken_export.csv"
    bad.write_bytes(b"\x00\x01binary")
    assert view.mapping_dialog(str(bad)) is None
    assert "broken_export.csv" in errors[0]
    assert view.model.undo_stack.count() == 0


def test_hidden_view_catches_up_when_shown(view):
    view.hide()
    view.model.set_experiment_properties(0, geometry="film-2d")
    assert view.prediction.form.text("n") == "3"  # not recomputed while hidden
    view.show()
    assert view.prediction.form.text("n") == "2"
    assert view.geometry.currentData() == "film-2d"


def test_unusable_position_mid_drag_keeps_the_band(view, isotherm_csv, monkeypatch):
    monkeypatch.setattr(QtWidgets.QMessageBox, "warning", lambda *args: pytest.fail("no dialog mid-drag"))
    _import(view, isotherm_csv[0])
    start, _end = view.plots.baseline_region.getRegion()
    view.plots.baseline_dragging.emit(start, start + 0.1)  # does not bracket the peak
    assert view.plots.baseline_region.isVisible()
    assert "Not usable" in view.calorimetry_panel.problem.text()


def test_default_window_action_restores_the_guideline_window(view, isotherm_csv):
    from app.kinetics.plots import x_to_avrami_y

    _import(view, isotherm_csv[0])
    default_n = view.calorimetry_panel.form.text("n")
    assert view.default_window_action.text() == "Reset fit window to 3-20 % (in use)"
    view.plots.window_region.setRegion((x_to_avrami_y(0.1), x_to_avrami_y(0.5)))
    assert view.default_window_action.text() == "Reset fit window to 3-20 % (now 10-50 %)"
    view.default_window_action.trigger()
    assert view.model.experiment(0).calorimetry.window == (0.03, 0.20)
    assert view.calorimetry_panel.form.text("n") == default_n
    assert view.model.undo_stack.count() == 3


# ---------------------------------------------------------------- intervals in the worker
def resampled_result(count=40, spherulites=25, seed=0):
    """A result with per-spherulite fits and a field area: its prediction's intervals come
    from the bootstrap (analysis.kinetics.uncertainty), not from a formula."""
    from analysis.results import Spherulite

    rng = np.random.default_rng(seed)
    rates = G_UM_PER_MIN * (1 + 0.03 * rng.standard_normal(spherulites))
    fits = tuple(Spherulite(i, 0.0, 0.0, 0.0, 1.0, float(r), 0.1, 0.99, 10, "ok",
                            growth_rate_se_um_per_min=0.03 * G_UM_PER_MIN) for i, r in enumerate(rates))
    base = hand_made_result(count=count)
    area = count / N_A_PER_MM2
    nucleation = dataclasses.replace(base.nucleation, burst_density_per_mm2=N_A_PER_MM2, field_area_mm2=area)
    return dataclasses.replace(base, spherulites=fits, nucleation=nucleation)


def _seeded_view(qtbot, tmp_path, seed):
    model = model_with([resampled_result()], tmp_path)
    model.set_project_fields(text="seed", series={**model.project.series, "resampling_seed": seed})
    view = KineticsView(model)
    qtbot.addWidget(view)
    view.show()
    return view


def test_prediction_intervals_resample_in_the_worker_with_the_stored_seed(qtbot, tmp_path):
    from analysis.kinetics.uncertainty import prediction_intervals
    from app.widgets.formatting import fmt_estimate, k_unit

    view = _seeded_view(qtbot, tmp_path, 7)
    job = view.intervals_job
    assert job.running  # started in the worker, not computed on the GUI thread
    assert "resampling" in view.prediction.problem.text()
    assert "95 % CI" not in view.prediction.form.text("k")
    qtbot.waitUntil(lambda: not job.running, timeout=60_000)
    shown = view.prediction.form.text("k")
    # the same numbers as the report's resampling with the project's stored seed
    expected = prediction_intervals(view.model.result(0), "bulk-3d", seed=7, thickness_um=THICKNESS_UM)
    assert shown == fmt_estimate(expected.k_per_min_n, k_unit(3.0)) and "95 % CI" in shown
    assert view.prediction.problem.text() == ""
    again = _seeded_view(qtbot, tmp_path, 7)  # a re-run repeats them
    qtbot.waitUntil(lambda: not again.intervals_job.running, timeout=60_000)
    assert again.prediction.form.text("k") == shown
    other = _seeded_view(qtbot, tmp_path, 8)  # another seed, other draws
    qtbot.waitUntil(lambda: not other.intervals_job.running, timeout=60_000)
    assert other.prediction.form.text("k") != shown


def test_cancel_stops_the_resampling_and_compute_restarts_it(qtbot, tmp_path, monkeypatch):
    import time

    from analysis.kinetics import uncertainty
    from analysis.progress import Progress
    from app.kinetics import logic

    def slow_steps(*args, **kwargs):  # the real resampling, after a long stretch of progress
        for i in range(400):
            time.sleep(0.005)
            yield Progress("resampling", i / 800)
        return (yield from uncertainty.prediction_intervals_steps(*args, **kwargs))

    monkeypatch.setattr(logic, "prediction_intervals_steps", slow_steps)
    view = _seeded_view(qtbot, tmp_path, 3)
    job = view.intervals_job
    assert job.running and job.button.text() == "Cancel"
    job.button.click()
    qtbot.waitUntil(lambda: not job.running, timeout=30_000)
    assert "cancelled" in view.prediction.problem.text()
    assert "95 % CI" not in view.prediction.form.text("k")
    view.refresh()  # a redraw does not start it again behind the user's back
    assert not job.running and job.button.text() == "Compute"
    job.button.click()
    assert job.running
    qtbot.waitUntil(lambda: not job.running, timeout=60_000)
    assert "95 % CI" in view.prediction.form.text("k") and view.prediction.problem.text() == ""
