"""The "Analysis settings…" dialog: generated from the descriptions, round trip, one undo step."""

from __future__ import annotations

import pytest
from fake_pipeline import FakeEngine
from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QCheckBox, QComboBox, QDoubleSpinBox, QSpinBox

from analysis.settings import AnalysisSettings, ArrivalSettings, specs_of
from app.core import model as m
from app.window.settings_dialog import AnalysisSettingsDialog

CHANGED = AnalysisSettings(arrival=ArrivalSettings(sensitivity=1.6, channel="grey", fill_wedges=False,
                                                   track_frames=20),
                           sensitivity_frames=0.8, n_sectors=72, nonlinear_alpha=0.05)


def test_one_editor_per_described_setting_with_range_unit_and_help(qtbot):
    dialog = AnalysisSettingsDialog("Tc 128", AnalysisSettings())
    qtbot.addWidget(dialog)
    expected = {s.key for s in specs_of(AnalysisSettings)} | {f"arrival.{s.key}" for s in specs_of(ArrivalSettings)}
    assert set(dialog.editors) == expected
    for key, editor in dialog.editors.items():
        spec = dialog.specs[key]
        assert spec.help in editor.toolTip() and "Default" in editor.toolTip()
        if isinstance(editor, (QSpinBox, QDoubleSpinBox)):
            assert editor.maximum() == pytest.approx(spec.high)
            assert editor.minimum() >= spec.low and editor.suffix().strip() == spec.unit
        else:
            assert isinstance(editor, QComboBox if spec.choices else QCheckBox)
    sectors = dialog.editors["n_sectors"]
    sectors.setValue(10**9)  # an editor cannot hold an out-of-range value
    assert sectors.value() == 720


def test_settings_round_trip_through_the_form(qtbot):
    dialog = AnalysisSettingsDialog("Tc 128", CHANGED)
    qtbot.addWidget(dialog)
    assert dialog.settings() == CHANGED
    dialog.editors["min_points"].setValue(6)
    dialog.editors["arrival.registration"].setCurrentText("off")
    assert dialog.settings() == CHANGED.changed("min_points", 6).changed("arrival.registration", "off")
    dialog.restore_defaults()
    assert dialog.settings() == AnalysisSettings()


def test_contradicting_values_keep_the_dialog_open(qtbot, monkeypatch):
    warnings = []
    monkeypatch.setattr("app.window.settings_dialog.QMessageBox.warning",
                        lambda parent, title, text: warnings.append(text))
    dialog = AnalysisSettingsDialog("Tc 128", AnalysisSettings())
    qtbot.addWidget(dialog)
    dialog.editors["arrival.persistence_frames"].setValue(20)
    dialog.editors["arrival.track_frames"].setValue(12)
    dialog.accept()
    assert dialog.result() == 0 and "track_frames must exceed persistence_frames" in warnings[0]


def test_applying_is_one_undo_step_and_analyses_again(qtbot, tmp_path, small_project):
    from app.window.main_window import MainWindow

    engine = FakeEngine()
    window = MainWindow(m.ProjectModel(engine=engine), settings=QSettings(str(tmp_path / "s.ini"), QSettings.IniFormat),
                        recovery_dir=str(tmp_path / "recovery"))
    qtbot.addWidget(window)
    window.open_project_path(small_project.path, ask=False)
    window.ask_analysis_settings = lambda index: (CHANGED, True)
    with qtbot.waitSignal(window.runner.all_finished, timeout=10000):
        window.actions_by_id["analysis_settings"].trigger()
    model = window.model
    assert [model.experiment(i).settings for i in (0, 1)] == [CHANGED, CHANGED]
    assert engine.calls["analyze"] == 2 and model.analysis(0).settings == CHANGED
    assert model.undo_stack.count() == 1 and model.undo_stack.undoText() == "Analysis settings of every experiment"
    model.undo_stack.undo()
    assert [model.experiment(i).settings for i in (0, 1)] == [AnalysisSettings()] * 2
    assert model.status(0) == m.STATUS_STALE  # the results on screen were made with CHANGED
