"""Imports and calibrations that change stored values say so first (no silent overwrite)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from analysis.kinetics.calorimetry import check_header, sniff_calorimetry_file
from analysis.project.file import CalorimetrySource, Experiment
from app.kinetics.calorimetry_dialog import CalorimetryMappingDialog

DEMO = Path(__file__).resolve().parents[2] / "sample_images"
FILE_127 = DEMO / "tc127" / "dsc_127C.csv"


@pytest.fixture
def experiment_124():
    if not FILE_127.exists():
        pytest.skip("the demo data is not in sample_images")
    stored = CalorimetrySource(file=str(DEMO / "tc124" / "dsc_124C.csv"), exotherm="up",
                               mass_mg=5.0, material="iPP", lag_s=6.0)
    return Experiment(name="Orvessa PN-12, 124 °C", stack_path="x.tif", temperature_c=124.0,
                      calorimetry=stored)


def test_header_temperature_sample_and_mass_are_compared():
    preview = sniff_calorimetry_file(FILE_127)
    assert (preview.sample_name, preview.temperature_c, preview.mass_mg) == (
        "Orvessa PN-12, Tc 127 C", 127.0, 5.0)
    same = check_header(preview, temperature_c=127.0, experiment_name="Orvessa PN-12, 127 °C",
                        mass_mg=5.0)
    assert same.conflicts == () and same.notes == ()
    found = check_header(preview, temperature_c=124.0, experiment_name="Lumeth QX 124", mass_mg=4.2)
    assert len(found.conflicts) == 2 and "127 °C" in found.conflicts[0] and "4.2 mg" in found.conflicts[1]
    assert len(found.notes) == 1 and "Lumeth" in found.notes[0]  # shown, not asked about
    unknown = check_header(preview, temperature_c=None, experiment_name="", mass_mg=None)
    assert unknown.conflicts == () and unknown.notes == ()


def test_a_temperature_in_the_sample_name_counts_when_the_header_has_no_line():
    preview = dataclasses.replace(sniff_calorimetry_file(FILE_127), temperature_c=None)
    found = check_header(preview, temperature_c=124.0, experiment_name="Orvessa", mass_mg=None)
    assert found.conflicts == ("the file is an isotherm at 127 °C, the experiment's Tc is 124 °C",)


def test_a_file_at_another_temperature_is_asked_about_and_the_lag_is_kept(qtbot, experiment_124):
    dialog = CalorimetryMappingDialog(str(FILE_127), experiment_124.calorimetry,
                                      experiment=experiment_124)
    qtbot.addWidget(dialog)
    assert not dialog.mismatch_note.isHidden() and "127 °C" in dialog.mismatch_note.text()
    assert dialog.lag.value() == 6.0  # the instrument's lag, not "no lag correction"
    assert dialog.material.currentData() == "iPP" and dialog.exotherm.currentData() == "up"
    asked = []
    dialog.confirm_mismatches = lambda: asked.append(True) or False
    dialog.accept()
    assert asked and dialog.source() is None  # refused: nothing imported, the dialog stays
    dialog.confirm_mismatches = lambda: True
    dialog.accept()
    assert dialog.source().lag_s == 6.0 and dialog.source().file == str(FILE_127)


def test_a_matching_file_is_imported_without_a_question(qtbot, experiment_124):
    experiment = dataclasses.replace(experiment_124, temperature_c=127.0)
    dialog = CalorimetryMappingDialog(str(FILE_127), experiment.calorimetry, experiment=experiment)
    qtbot.addWidget(dialog)
    dialog.confirm_mismatches = lambda: pytest.fail("asked without a reason")
    assert dialog.mismatch_note.isHidden()
    dialog.accept()
    assert dialog.source() is not None


def test_calibration_shows_the_current_scale_and_the_change(qtbot):
    import numpy as np

    from app.microscopy.calibration import CalibrationDialog

    dialog = CalibrationDialog(np.zeros((320, 320), np.uint8), current_um_per_px=0.8)
    qtbot.addWidget(dialog)
    assert "0.8 µm per pixel" in dialog.current_label.text()
    assert dialog.um_per_px == pytest.approx(0.8)  # untouched, OK keeps the current scale
    assert dialog.change_text().startswith("none")
    dialog.known_um.setValue(100.0)  # the old preset: 100 µm over the 160 px line
    assert dialog.um_per_px == pytest.approx(0.625)
    assert dialog.change_label.text() == "0.8 → 0.625 µm/px (-21.9%)"
    fresh = CalibrationDialog(np.zeros((320, 320), np.uint8))
    qtbot.addWidget(fresh)
    assert fresh.current_label.text() == "not set" and "none yet" in fresh.change_text()
