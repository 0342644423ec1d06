"""The "Experiment kind and temperature…" dialog: log mapping, typed programme, errors, undo."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from fake_pipeline import FakeEngine
from PySide6.QtCore import QSettings

from analysis.kinetics.temperature_programme import programme_of_source
from analysis.project.model import Experiment, TemperatureSource
from app.core import model as m
from app.window.temperature_source_dialog import TemperatureSourceDialog


def _log(path, rows, header="Time (min);Block temperature (K)"):
    path.write_text("# stage export\n" + header + "\n" + "".join(f"{t};{c}\n" for t, c in rows), encoding="utf-8")
    return path


def _cooling_log(path):
    """A block cooling at 6 K/min from 413.15 K, logged every 0.1 min (6 s)."""
    t = np.arange(0.0, 10.0, 0.1)
    return _log(path, [(f"{v:.2f}", f"{413.15 - 6.0 * v:.3f}") for v in t])


def _experiment(tmp_path, **kw):
    return Experiment(name="ramp 6", stack_path=str(tmp_path / "stack.tif"), **kw)


def test_a_log_is_mapped_with_units_from_its_header(qtbot, tmp_path):
    log = _cooling_log(tmp_path / "stage.csv")
    dialog = TemperatureSourceDialog(_experiment(tmp_path), (0.0, 300.0))
    qtbot.addWidget(dialog)
    dialog.kind.setCurrentIndex(dialog.kind.findData("ramp"))
    dialog.set_log_file(str(log))
    assert dialog.time_col.currentIndex() == 0 and dialog.temperature_col.currentIndex() == 1
    assert dialog.table.rowCount() > 0 and dialog.table.item(0, 1).text() == "413.150"
    dialog.clock_offset.setValue(-30.0)
    dialog.lag.setValue(4.0)
    dialog.accept()
    values = dialog.result_values()
    assert values["kind"] == "ramp"
    source = values["temperature_source"]
    assert source.log_file == str(log) and source.time_col == "Time (min)"
    assert source.temperature_col == "Block temperature (K)" and source.time_unit is None
    assert (source.clock_offset_s, source.lag_s) == (-30.0, 4.0)
    programme = programme_of_source(source)
    # min and K from the header: 1 min after the log began (30 s after frame 0) the block
    # read 134 °C; the film trails a 6 K/min ramp by rate × lag = 0.4 K (first-order lag)
    assert programme.temperature_at(30.0) == pytest.approx(140.0 - 6.0 + 0.4, abs=0.02)


def test_bad_log_gives_one_line_naming_the_file_and_keeps_the_dialog_open(qtbot, tmp_path):
    rows = [("0.0", "400"), ("0.1", "399"), ("0.1", "398"), ("0.3", "397")]
    log = _log(tmp_path / "broken.csv", rows)
    dialog = TemperatureSourceDialog(_experiment(tmp_path), (0.0, 10.0))
    qtbot.addWidget(dialog)
    dialog.kind.setCurrentIndex(dialog.kind.findData("ramp"))
    dialog.set_log_file(str(log))
    dialog.accept()
    text = dialog.error.text()
    assert dialog.result_values() is None and dialog.result() == 0
    assert "broken.csv" in text and "does not increase" in text and "\n" not in text


def test_a_log_that_misses_the_recording_is_refused(qtbot, tmp_path):
    log = _cooling_log(tmp_path / "short.csv")  # 594 s of log
    dialog = TemperatureSourceDialog(_experiment(tmp_path), (0.0, 2000.0))
    qtbot.addWidget(dialog)
    dialog.kind.setCurrentIndex(dialog.kind.findData("ramp"))
    dialog.set_log_file(str(log))
    dialog.accept()
    assert dialog.result_values() is None and "short.csv" in dialog.error.text()
    assert "clock offset" in dialog.error.text()


def test_typed_programme_of_ramps_and_holds_in_minutes(qtbot, tmp_path):
    from analysis.kinetics.temperature_programme import ProgrammeSegment

    dialog = TemperatureSourceDialog(_experiment(tmp_path), (0.0, 900.0))
    qtbot.addWidget(dialog)
    dialog.kind.setCurrentIndex(dialog.kind.findData("ramp"))
    dialog.from_programme.setChecked(True)
    dialog.start_c.setValue(140.0)
    dialog.add_segment(ProgrammeSegment(rate_k_per_min=5.0, end_c=125.0))
    dialog.add_segment(ProgrammeSegment(hold_s=120.0))
    dialog.add_segment(ProgrammeSegment(rate_k_per_min=2.0, end_c=120.0))
    assert dialog.segments.item(1, 3).text() == "2"  # the hold shown in minutes
    dialog.accept()
    source = dialog.result_values()["temperature_source"]
    assert source.programme == "140, 5:125, hold:120, 2:120" and source.log_file is None
    programme = programme_of_source(source)
    # 15 K at 5 K/min is 180 s, then a 120 s hold, then 2 K/min
    assert programme.temperature_at([90.0, 240.0, 330.0]) == pytest.approx([132.5, 125.0, 124.0])


def test_unusable_segment_is_named(qtbot, tmp_path):
    from analysis.kinetics.temperature_programme import ProgrammeSegment

    dialog = TemperatureSourceDialog(_experiment(tmp_path))
    qtbot.addWidget(dialog)
    dialog.kind.setCurrentIndex(dialog.kind.findData("ramp"))
    dialog.from_programme.setChecked(True)
    dialog.add_segment(ProgrammeSegment(rate_k_per_min=5.0, end_c=100.0))
    dialog.segments.item(0, 1).setText("fast")
    dialog.accept()
    assert dialog.result_values() is None and "segment 1" in dialog.error.text()


def test_stored_source_fills_the_form_and_isothermal_keeps_it(qtbot, tmp_path):
    log = _cooling_log(tmp_path / "stage.csv")
    stored = TemperatureSource(log_file=str(log), time_col="Time (min)", temperature_col="Block temperature (K)",
                               time_unit="min", clock_offset_s=-12.0, lag_s=3.0)
    dialog = TemperatureSourceDialog(_experiment(tmp_path, kind="ramp", temperature_source=stored))
    qtbot.addWidget(dialog)
    assert dialog.from_log.isChecked() and dialog.time_unit.currentText() == "min"
    assert dialog.clock_offset.value() == -12.0 and dialog.lag.value() == 3.0
    dialog.accept()
    assert dialog.result_values() == {"kind": "ramp", "temperature_source": stored}
    other = TemperatureSourceDialog(_experiment(tmp_path, kind="ramp", temperature_source=stored))
    qtbot.addWidget(other)
    other.kind.setCurrentIndex(other.kind.findData("isothermal"))
    assert not other.source_box.isEnabled()
    other.accept()
    assert other.result_values() == {"kind": "isothermal", "temperature_source": stored}


def test_editing_is_one_undo_step_and_refits_without_a_new_frame_pass(qtbot, tmp_path, small_project):
    from app.window.main_window import MainWindow

    log = _cooling_log(tmp_path / "stage.csv")
    source = TemperatureSource(log_file=str(log), lag_s=2.0)
    engine = FakeEngine()
    window = MainWindow(m.ProjectModel(engine=engine), settings=QSettings(str(tmp_path / "s.ini"), QSettings.IniFormat),
                        recovery_dir=str(tmp_path / "recovery"))
    qtbot.addWidget(window)
    window.open_project_path(small_project.path, ask=False)
    model = window.model
    model.select(0)
    window.ask_temperature_source = lambda index: {"kind": "ramp", "temperature_source": source}
    with qtbot.waitSignal(window.runner.all_finished, timeout=10000):
        window.actions_by_id["temperature_source"].trigger()  # never analysed: analyse it now
    assert model.experiment(0).kind == "ramp" and model.experiment(0).temperature_source == source
    assert engine.calls["analyze"] == 1 and model.status(0) == m.STATUS_DONE
    assert model.undo_stack.count() == 1 and model.undo_stack.undoText() == "Temperature of Tc 128"
    updates = []
    model.analysis_updated.connect(updates.append)
    changed = dataclasses.replace(source, lag_s=5.0)
    window.ask_temperature_source = lambda index: {"kind": "ramp", "temperature_source": changed}
    window.actions_by_id["temperature_source"].trigger()
    # analysed already: the pages refit G(T) from the kept analysis, no second frame pass
    assert updates == [0] and engine.calls["analyze"] == 1 and model.status(0) == m.STATUS_DONE
    model.undo_stack.undo()
    assert model.experiment(0).temperature_source == source
    model.undo_stack.undo()
    assert model.experiment(0).kind == "isothermal" and model.experiment(0).temperature_source is None
