"""The kinetics view on the demo project: import its 130 °C isotherm through the mapping
dialog, drag the fit window, check the numbers change and that undo restores them."""

from __future__ import annotations

import dataclasses

import pytest
from test_kinetics_view import _collect_qt_garbage  # noqa: F401 (autouse fixture)

from analysis.project.file import load_project
from app.core.model import ProjectModel
from app.kinetics.plots import x_to_avrami_y
from app.kinetics.view import KineticsView


@pytest.fixture
def demo_view(qtbot, demo_project_path):
    project = load_project(str(demo_project_path))
    index = next(i for i, e in enumerate(project.experiments) if e.temperature_c == 130.0)
    # Start from the experiment without its isotherm: the test imports it like a user.
    experiments = list(project.experiments)
    isotherm = experiments[index].calorimetry.file
    experiments[index] = dataclasses.replace(experiments[index], calorimetry=None)
    model = ProjectModel(dataclasses.replace(project, experiments=tuple(experiments)))
    model.select(index)
    view = KineticsView(model)
    qtbot.addWidget(view)
    view.resize(1400, 900)
    view.show()
    return view, isotherm


def test_demo_isotherm_import_fit_window_and_undo(demo_view):
    view, isotherm = demo_view
    model, form = view.model, view.calorimetry_panel.form
    assert "No calorimetry" in view.calorimetry_panel.problem.text()
    dialog = view.mapping_dialog(isotherm)
    assert dialog.preview.columns[:2] == ("Time (min)", "Heat flow (mW)")
    assert dialog.mass.value() == pytest.approx(5.0)  # read from the file's header lines
    dialog.accept()
    assert view.map_and_store(isotherm, dialog)
    assert model.undo_stack.count() == 1
    assert model.experiment(model.current_index).calorimetry.material == "iPP"  # the project's
    n_default, t_half_default = form.text("n"), form.text("t_half")
    # The demo bulk sample is simulated with 3-D kinetics; a guideline-window fit gives n near 3
    # (Avrami 1940, J. Chem. Phys. 8, 212, from memory).
    assert 2.5 < float(n_default.split()[0]) < 4.5
    view.plots.window_region.setRegion((x_to_avrami_y(0.2), x_to_avrami_y(0.7)))
    assert model.undo_stack.count() == 2
    assert form.text("n") != n_default and form.text("window").startswith("20.0%")
    model.undo_stack.undo()
    assert form.text("n") == n_default and form.text("t_half") == t_half_default
    model.undo_stack.undo()
    assert model.experiment(model.current_index).calorimetry is None
