"""Hostile and malformed inputs: each refused with exit 2 and one stderr line naming the file.

Every command line runs in its own process (forked from one that has imported the
analysis stack once, see ``cli_cases.py``) under a 1 GiB address-space limit and a
60 s alarm; each case must also finish well inside that (``CASE_SECONDS``). Families:
non-regular files and unbounded sources, size limits, declared pixel counts over the
memory budget, hostile JSON, strict table rows and encodings, output folders checked
before any work, library chatter, slow fits, and inputs that used to surface as
internal errors. Hypothesis drives the readers with random bytes.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
import zlib
from pathlib import Path

import numpy as np
import pytest
import tifffile
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analysis.errors import InputError
from analysis.kinetics.calorimetry import read_isotherm
from analysis.kinetics.lauritzen_hoffman import read_growth_table
from analysis.project.file import load_project
from analysis.textio import TEXT_LIMIT_ENV, read_text

pytestmark = pytest.mark.skipif(not hasattr(os, "fork") or not hasattr(os, "mkfifo"),
                                reason="needs fork and FIFOs (POSIX)")

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "sample_images" / "demo.spherokin.json"
DSC = ROOT / "sample_images" / "tc124" / "dsc_124C.csv"
MEMORY_BYTES = 1 << 30
CASE_SECONDS = 30.0
LH = ["--tm0-c", "186", "--tg-c", "-10"]


def _tiff_bomb(path: Path) -> None:
    """A valid 1.3 MB zlib TIFF declaring 3 frames of 20000 x 20000 px (one tile reused)."""
    tile = zlib.compress(bytes(1024 * 1024))
    count = 3 * ((20000 + 1023) // 1024) ** 2
    tifffile.imwrite(path, data=(tile for _ in range(count)), shape=(3, 20000, 20000),
                     dtype=np.uint8, tile=(1024, 1024), compression="zlib",
                     photometric="minisblack", metadata={"axes": "TYX"})


def _growth_rows(temperatures) -> str:
    """A growth-rate table following G = G0 exp(-Kg x) in the LH coordinates (invented)."""
    from analysis.kinetics.lauritzen_hoffman import LHConstants, lh_growth_rate

    g = lh_growth_rate(np.asarray(temperatures, float), 2e6, 3e5, LHConstants(186.0, -10.0))
    return "".join(f"{t:.4f},{v:.6g}\n" for t, v in zip(temperatures, g))


def _project(path: Path, **fields) -> Path:
    doc = {"format": "spherokin-project", "schema_version": 1, "experiments": [], **fields}
    path.write_text(json.dumps(doc), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def inputs(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("hostile")
    for name in ("pipe.csv", "pipe.spherokin.json", "pipe.tif"):
        os.mkfifo(d / name)
    (d / "folder.csv").mkdir()
    (d / "afile").write_text("not a folder\n", encoding="utf-8")
    (d / "shots").mkdir()
    header = "temperature_c,growth_rate_um_per_min\n"
    (d / "good.csv").write_text(header + _growth_rows([120, 124, 128, 132, 136]), encoding="utf-8")
    (d / "comma.csv").write_text("temperature_c,growth_rate_um_per_min,ci95_um_per_min\n"
                                 "120,24.1,1.0\n124,14,6,0.3\n128,5.0,0.3\n132,1.1,0.1\n",
                                 encoding="utf-8")
    (d / "utf16.csv").write_text(header + _growth_rows([120, 124, 128, 132]), encoding="utf-16")
    (d / "wide.csv").write_text(header + "120," + ",".join(["1"] * 3_000_000) + "\n",
                                encoding="utf-8")
    rows = np.linspace(100.0, 150.0, 10_000)
    (d / "rows10k.csv").write_text(header + _growth_rows(rows), encoding="utf-8")
    (d / "dsc_utf16.csv").write_bytes(DSC.read_text(encoding="utf-8").encode("utf-16"))
    _tiff_bomb(d / "bomb.tif")
    tifffile.imwrite(d / "two_channels.tif", np.zeros((4, 2, 32, 32), np.uint8), imagej=True,
                     metadata={"axes": "TCYX"})
    tifffile.imwrite(d / "odd_axes.tif", np.zeros((4, 32, 32, 5), np.uint8),
                     photometric="minisblack", metadata={"axes": "TYXQ"})
    import cv2

    (d / "png_bombs").mkdir()
    ok, png = cv2.imencode(".png", np.zeros((9000, 9000), np.uint8), [cv2.IMWRITE_PNG_COMPRESSION, 9])
    for name in ("f1.png", "f2.png"):  # 80 kB each, 81 Mpx declared
        (d / "png_bombs" / name).write_bytes(png.tobytes())
    (d / "noise.avi").write_bytes(np.random.default_rng(0).bytes(200_000))
    (d / "deep.spherokin.json").write_text("[" * 100_000 + "]" * 100_000, encoding="utf-8")
    (d / "bigint.spherokin.json").write_text(
        '{"format": "spherokin-project", "schema_version": 1, "x": ' + "9" * 5000 + "}",
        encoding="utf-8")
    _project(d / "hw.spherokin.json", series={"hoffman_weeks_pairs": [[120, 160], [124, "x"]]})
    _project(d / "material.spherokin.json", material="unobtainium")
    return d


#: name -> (argv, extra environment, expected exit status, text the one stderr line holds)
CASES = {
    "fifo growth table": (["lauritzen-hoffman", "pipe.csv", "--out", "o", *LH], {}, 2, "pipe"),
    "fifo calorimetry": (["calorimetry", "pipe.csv", "--out", "o"], {}, 2, "pipe"),
    "fifo stack": (["analyze", "pipe.tif", "--out", "o"], {}, 2, "pipe"),
    "fifo project": (["report", "pipe.spherokin.json", "--out", "o"], {}, 2, "pipe"),
    "/dev/zero calorimetry": (["calorimetry", "/dev/zero", "--out", "o"], {}, 2, "device"),
    "/dev/urandom calorimetry": (["calorimetry", "/dev/urandom", "--out", "o"], {}, 2, "device"),
    "folder as table": (["lauritzen-hoffman", "folder.csv", "--out", "o", *LH], {}, 2, "folder"),
    "text size limit": (["lauritzen-hoffman", "good.csv", "--out", "o", *LH],
                        {TEXT_LIMIT_ENV: "0.0001"}, 2, TEXT_LIMIT_ENV),
    "tiff bomb analyze": (["analyze", "bomb.tif", "--out", "o", "--um-per-px", "1",
                           "--interval-s", "1"], {}, 2, "--memory-budget-mb"),
    "tiff bomb info": (["info", "bomb.tif"], {}, 0, None),
    "png bombs in a folder": (["analyze", "png_bombs", "--out", "o"], {}, 2, "Mpx limit"),
    "deep json": (["report", "deep.spherokin.json", "--out", "o"], {}, 2, "nested"),
    "huge integer": (["report", "bigint.spherokin.json", "--out", "o"], {}, 2, "4300 digits"),
    "decimal comma row": (["lauritzen-hoffman", "comma.csv", "--out", "o", *LH], {}, 2,
                          "line 3 has 4 fields"),
    "3-million-field line": (["lauritzen-hoffman", "wide.csv", "--out", "o", *LH], {}, 2,
                             "more than 1000 fields"),
    "utf-16 growth table": (["lauritzen-hoffman", "utf16.csv", "--out", "o16", *LH], {}, 0, None),
    "utf-16 calorimetry": (["calorimetry", "dsc_utf16.csv", "--out", "oc"], {}, 0, None),
    "10k-row growth table": (["lauritzen-hoffman", "rows10k.csv", "--out", "o10k", *LH], {}, 0, None),
    "out is a file: analyze": (["analyze", "two_channels.tif", "--out", "afile"], {}, 2, "is a file"),
    "out is a file: report": (["report", str(DEMO), "--out", "afile"], {}, 2, "is a file"),
    "out is a file: calorimetry": (["calorimetry", str(DSC), "--out", "afile"], {}, 2, "is a file"),
    "out is a file: lauritzen-hoffman": (["lauritzen-hoffman", "good.csv", "--out", "afile", *LH],
                                         {}, 2, "is a file"),
    "out under a file": (["calorimetry", str(DSC), "--out", "afile/sub"], {}, 2, "afile/sub"),
    "screenshot is a folder": (["gui", str(DEMO), "--screenshot", "shots"], {}, 2, "is a folder"),
    "screenshot under a file": (["gui", str(DEMO), "--screenshot", "afile/shot.png"], {}, 2,
                                "afile/shot.png"),
    "Tg above every Tc": (["lauritzen-hoffman", "good.csv", "--out", "o", "--tm0-c", "186",
                           "--tg-c", "200"], {}, 2, "above every Tc"),
    "unknown material": (["lauritzen-hoffman", "good.csv", "--out", "o", *LH, "--material",
                          "unobtainium"], {}, 2, "unknown material"),
    "unknown project material": (["report", "material.spherokin.json", "--out", "o"], {}, 2,
                                 "unknown material"),
    "malformed Hoffman-Weeks pair": (["report", "hw.spherokin.json", "--out", "o"], {}, 2,
                                     "hoffman_weeks_pairs"),
    "two channels": (["info", "two_channels.tif"], {}, 2, "2 channels"),
    "odd axes": (["info", "odd_axes.tif"], {}, 2, "TYXQ"),
    "garbage video": (["info", "noise.avi"], {}, 2, "noise.avi"),
}


@pytest.fixture(scope="module")
def results(inputs, tmp_path_factory) -> dict:
    """Run every case once (about 15 s in all) and index the results by name."""
    cases = [{"name": name, "argv": argv, "env": env, "cwd": str(inputs)}
             for name, (argv, env, _code, _text) in CASES.items()]
    spec = tmp_path_factory.mktemp("spec") / "cases.json"
    spec.write_text(json.dumps({"cases": cases, "timeout_s": 60, "memory_bytes": MEMORY_BYTES}),
                    encoding="utf-8")
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", QT_QPA_PLATFORM="offscreen")
    done = subprocess.run([sys.executable, str(Path(__file__).with_name("cli_cases.py")), str(spec)],
                          capture_output=True, text=True, timeout=600, env=env, cwd=inputs)
    assert done.returncode == 0, done.stderr[-2000:]
    return {r["name"]: r for r in map(json.loads, done.stdout.splitlines())}


@pytest.mark.parametrize("name", list(CASES))
def test_case_is_bounded_and_answered_in_one_line(results, name):
    argv, _env, code, text = CASES[name]
    result = results[name]
    lines = result["stderr"].splitlines()
    assert result["code"] == code, result["stderr"][-1500:]
    assert result["seconds"] < CASE_SECONDS  # killed by the alarm at 60 s
    assert result["max_rss_kb"] < MEMORY_BYTES // 1024  # and by RLIMIT_AS at 1 GiB
    if code == 2:
        assert len(lines) == 1, lines
        assert lines[0].startswith(f"spherokin {argv[0]}: ")
        named = next(a for a in argv[1:] if not a.startswith("-"))
        assert Path(named).name in lines[0] or text in lines[0]
        assert text in lines[0] and len(lines[0]) < 400
    else:
        assert "Traceback" not in result["stderr"]


def test_a_refused_report_wrote_nothing_and_analysed_nothing(results, inputs):
    assert results["out is a file: report"]["seconds"] < 10.0  # the analysis takes minutes
    assert (inputs / "afile").read_text(encoding="utf-8") == "not a folder\n"


def test_readable_inputs_gave_the_right_numbers(results, inputs):
    fit = json.loads((inputs / "o10k" / "secondary_nucleation.json").read_text(encoding="utf-8"))
    assert fit["kg_k2"] == pytest.approx(3e5, rel=1e-6)  # the table was made with Kg = 3e5 K^2
    utf16 = json.loads((inputs / "o16" / "secondary_nucleation.json").read_text(encoding="utf-8"))
    assert utf16["kg_k2"] == pytest.approx(3e5, rel=1e-4)  # 6 significant digits in the file
    assert (inputs / "oc" / "calorimetry.json").is_file()


# ---------------------------------------------------------------- readers, in process
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=2000))
def test_random_bytes_are_read_or_refused_cleanly(tmp_path, raw):
    path = tmp_path / "random.csv"
    path.write_bytes(raw)
    for reader in (read_text, read_growth_table, read_isotherm):
        try:
            reader(path)
        except InputError as err:
            assert str(path) in str(err) and "\n" not in str(err) and len(str(err)) < 600


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.recursive(st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=8),
                    lambda inner: st.lists(inner, max_size=4)
                    | st.dictionaries(st.text(max_size=6), inner, max_size=4), max_leaves=30))
def test_random_json_projects_load_or_are_refused_cleanly(tmp_path, document):
    path = tmp_path / "random.spherokin.json"
    if isinstance(document, dict):
        document = {"format": "spherokin-project", "schema_version": 1, **document}
    path.write_text(json.dumps(document), encoding="utf-8")
    try:
        load_project(path)
    except InputError as err:
        assert str(path) in str(err) and "\n" not in str(err)


def test_staged_outputs_leave_nothing_when_a_writer_fails(tmp_path):
    from analysis.outputs import STAGING_PREFIX, staged_outputs

    (tmp_path / "a.csv").write_text("old\n", encoding="utf-8")
    with pytest.raises(RuntimeError):
        with staged_outputs(tmp_path) as stage:
            (stage / "a.csv").write_text("new\n", encoding="utf-8")
            raise RuntimeError("the second writer failed")
    assert (tmp_path / "a.csv").read_text(encoding="utf-8") == "old\n"
    assert not list(tmp_path.glob(STAGING_PREFIX + "*"))


def test_control_characters_in_names_do_not_break_the_spreadsheet(tmp_path):
    from openpyxl import load_workbook

    from analysis.reporting.tables import Table, write_xlsx

    path = write_xlsx({"growth": Table(["experiment"], [["Tc\x07 124\x1b"]])}, tmp_path / "t.xlsx")
    assert load_workbook(path)["growth"]["A2"].value == "Tc  124 "


def test_stale_temporaries_of_killed_saves_are_removed_on_the_next_save(tmp_path):
    from analysis.project.file import new_project, save_project

    target = tmp_path / "p.spherokin.json"
    stale = [tmp_path / ".p.spherokin.json.abcd1234.part.json", tmp_path / ".p.spherokin.json.wxyz9876.tmp"]
    young = tmp_path / ".p.spherokin.json.young123.part.json"
    other = tmp_path / ".q.spherokin.json.abcd1234.part.json"
    for path in (*stale, young, other):
        path.write_text("{", encoding="utf-8")
    old = time.time() - 3600
    for path in (*stale, other):
        os.utime(path, (old, old))
    save_project(new_project(), target)
    assert not any(p.exists() for p in stale)
    assert young.exists() and other.exists()  # a save in progress; another project's


def test_memory_budget_from_option_or_environment(tmp_path, monkeypatch):
    from analysis.stack.budget import MEMORY_BUDGET_ENV, check_memory_budget
    from analysis.stack.frames import open_stack

    path = tmp_path / "small.tif"
    tifffile.imwrite(path, np.zeros((4, 64, 64), np.uint8), photometric="minisblack",
                     metadata={"axes": "TYX"})
    stack = open_stack(path, um_per_px=1.0, interval_s=1.0)
    check_memory_budget(stack, 1000)  # ~200 MB needed
    with pytest.raises(InputError, match="--memory-budget-mb") as info:
        check_memory_budget(stack, 100)
    assert str(path) in str(info.value)
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "100")
    with pytest.raises(InputError, match="budget"):
        check_memory_budget(stack)
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "plenty")
    with pytest.raises(InputError, match="not a number"):
        check_memory_budget(stack)


def test_file_stems_are_safe_names_for_every_writer():
    from analysis.outputs import file_stem

    assert file_stem("Orvessa PN-12, cooling 5 K/min") == "Orvessa_PN-12_cooling_5_K_min"
    assert file_stem("../../etc/passwd\x00\n") == "etc_passwd"
    assert file_stem("...") == "experiment" and len(file_stem("x" * 500)) == 60
