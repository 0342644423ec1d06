"""The calorimetry column-mapping dialog on simulated isotherm exports (both dialects)."""

from __future__ import annotations

import pytest
from PySide6 import QtWidgets

from analysis.errors import InputError
from analysis.synthetic.dsc import simulate_dsc_isotherm, write_dsc_csv
from app.kinetics.calorimetry_dialog import CalorimetryMappingDialog


@pytest.fixture(scope="module")
def isotherm():
    return simulate_dsc_isotherm(duration_s=900.0, interval_s=2.0, seed=3)


def _write(tmp_path, isotherm, name, **dialect):
    path = tmp_path / name
    write_dsc_csv(isotherm, path, temperature_c=128.0, **dialect)
    return str(path)


def test_preview_and_guessed_mapping(qtbot, tmp_path, isotherm):
    path = _write(tmp_path, isotherm, "run.csv")
    dialog = CalorimetryMappingDialog(path)
    qtbot.addWidget(dialog)
    assert dialog.table.rowCount() == 12 and dialog.table.columnCount() == 3
    assert dialog.table.item(0, 0).text().startswith("0.0")
    assert "Mass" in dialog.metadata.toPlainText()
    assert dialog.time_col.currentIndex() == 0 and dialog.flow_col.currentIndex() == 1
    assert dialog.mass.value() == pytest.approx(isotherm.mass_mg)
    dialog.exotherm.setCurrentIndex(dialog.exotherm.findData("up"))
    dialog.accept()
    source = dialog.source()
    assert dialog.result() == QtWidgets.QDialog.DialogCode.Accepted
    assert source.file == path
    assert source.time_col == "Time (min)" and source.heat_flow_col == "Heat flow (mW)"
    assert source.exotherm == "up" and source.mass_mg == pytest.approx(isotherm.mass_mg)


def test_decimal_comma_dialect_with_seconds(qtbot, tmp_path, isotherm):
    path = _write(tmp_path, isotherm, "run_eu.txt", delimiter=";", decimal=",", time_unit="s")
    dialog = CalorimetryMappingDialog(path)
    qtbot.addWidget(dialog)
    assert "semicolon" in dialog.findChildren(QtWidgets.QLabel)[0].text()
    dialog.time_unit.setCurrentText("s")
    dialog.accept()
    assert dialog.source().time_unit == "s"


def test_bad_mapping_keeps_dialog_open_with_error(qtbot, tmp_path, isotherm):
    path = _write(tmp_path, isotherm, "run.csv")
    dialog = CalorimetryMappingDialog(path)
    qtbot.addWidget(dialog)
    dialog.flow_col.setCurrentIndex(dialog.time_col.currentIndex())
    dialog.accept()
    assert dialog.source() is None
    assert "run.csv" in dialog.error.text() and "same" in dialog.error.text()


def test_unreadable_file_raises_input_error_naming_it(tmp_path):
    path = tmp_path / "notes.csv"
    path.write_text("this is not\na calorimetry export\n")
    with pytest.raises(InputError, match="notes.csv"):
        CalorimetryMappingDialog(str(path))


def test_existing_mapping_is_restored(qtbot, tmp_path, isotherm):
    from analysis.project.file import CalorimetrySource

    path = _write(tmp_path, isotherm, "run.csv")
    current = CalorimetrySource(file=path, time_col="Time (min)", heat_flow_col="Heat flow (mW)",
                                exotherm="up", window=(0.05, 0.3), mass_mg=7.5, lag_s=6.0)
    dialog = CalorimetryMappingDialog(path, current)
    qtbot.addWidget(dialog)
    assert dialog.exotherm.currentData() == "up" and dialog.mass.value() == 7.5
    assert dialog.lag.value() == 6.0
    dialog.accept()
    assert dialog.source().window == (0.05, 0.3)  # settings made in the view survive a remap
    assert dialog.source().lag_s == 6.0


def test_wrong_exotherm_direction_is_caught_before_import(qtbot, tmp_path, isotherm):
    path = _write(tmp_path, isotherm, "run.csv")  # simulated with the exotherm up
    dialog = CalorimetryMappingDialog(path)
    qtbot.addWidget(dialog)
    dialog.exotherm.setCurrentIndex(dialog.exotherm.findData("down"))
    dialog.accept()
    assert dialog.source() is None and "run.csv" in dialog.error.text()
