"""The command line: `info`, exit codes, and one clear line on bad input."""

import subprocess
import sys

import numpy as np
import tifffile

from analysis.cli.main import main


def _write(path, **metadata):
    tifffile.imwrite(path, np.zeros((3, 16, 16), np.uint8), imagej=True,
                     resolution=(1 / 0.65, 1 / 0.65), metadata={"axes": "TYX", **metadata})
    return path


def test_info_reports_scale_and_interval_and_where_they_came_from(tmp_path, capsys):
    path = _write(tmp_path / "s.tif", unit="um", finterval=5)
    assert main(["info", str(path)]) == 0
    out = capsys.readouterr().out
    assert "0.65 µm/px  [from file (ImageJ tags)]" in out
    assert "5 s  [from file (ImageJ tags)]" in out
    assert "frames:       3" in out


def test_info_says_what_is_missing(tmp_path, capsys):
    tifffile.imwrite(tmp_path / "bare.tif", np.zeros((2, 8, 8), np.uint8))
    assert main(["info", str(tmp_path / "bare.tif")]) == 0
    out = capsys.readouterr().out
    assert "pixel size:   MISSING" in out and "frame times:  MISSING" in out


def test_info_on_a_truncated_tiff_exits_2_with_one_line_naming_the_file(tmp_path):
    path = _write(tmp_path / "s.tif", unit="um", finterval=5)
    blob = path.read_bytes()
    (tmp_path / "cut.tif").write_bytes(blob[: len(blob) // 2])
    result = subprocess.run([sys.executable, "-m", "analysis.cli.main", "info", str(tmp_path / "cut.tif")],
                            capture_output=True, text=True)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "cut.tif" in lines[0]


def test_bad_calibration_on_the_command_line_exits_2(tmp_path, capsys):
    path = _write(tmp_path / "s.tif", unit="um", finterval=5)
    assert main(["info", str(path), "--um-per-px", "-1"]) == 2
    assert "positive" in capsys.readouterr().err
