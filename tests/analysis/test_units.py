"""The generic helpers in analysis.units: N_V = N_A / h, JSON cleaning, atomic writes."""

import json
import math

import numpy as np
import pytest

from analysis.errors import InputError
from analysis.units import (
    json_clean,
    json_text,
    per_mm3_from_per_mm2,
    write_atomic,
    write_csv_atomic,
    write_json_atomic,
)


def test_volumetric_density_divides_by_the_film_thickness():
    # N_V = N_A / h (docs/sources.md §1.7): 800 mm^-2 in a 20 um film is 40 000 mm^-3
    assert per_mm3_from_per_mm2(800.0, 20.0) == pytest.approx(40000.0)
    assert per_mm3_from_per_mm2(800.0, None) is None
    assert per_mm3_from_per_mm2(800.0, 0.0) is None
    assert per_mm3_from_per_mm2(None, 20.0) is None


def test_json_clean_turns_non_finite_numbers_into_null_and_numpy_into_python():
    doc = {"a": math.nan, "b": [1.0, np.float32(np.inf), np.int64(3)], "c": (np.bool_(True),),
           "d": np.array([0.5, np.nan]), "e": "text"}
    assert json_clean(doc) == {"a": None, "b": [1.0, None, 3], "c": [True], "d": [0.5, None],
                               "e": "text"}
    assert json.loads(json_text({"x": -math.inf, "µ": 1})) == {"x": None, "µ": 1}


def test_atomic_write_keeps_the_old_file_when_the_writer_fails(tmp_path):
    target = write_json_atomic(tmp_path / "s.json", {"v": 1})
    assert json.loads(target.read_text()) == {"v": 1}

    def broken(temporary):
        temporary.write_text("half")
        raise OSError("disk full")

    with pytest.raises(InputError, match="s.json: could not write the file .disk full"):
        write_atomic(target, broken)
    assert json.loads(target.read_text()) == {"v": 1}
    assert [p.name for p in tmp_path.iterdir()] == ["s.json"]


def test_atomic_write_keeps_the_suffix_for_format_sniffing_writers_and_names_missing_folders(tmp_path):
    seen = []
    write_atomic(tmp_path / "fig.png", lambda temporary: (seen.append(temporary.suffix),
                                                          temporary.write_bytes(b"x")))
    assert seen == [".png"]
    write_csv_atomic(tmp_path / "t.csv", [("a", "b"), (1, "=x")])
    assert (tmp_path / "t.csv").read_text().splitlines() == ["a,b", "1,=x"]
    with pytest.raises(InputError, match="missing.*folder does not exist"):
        write_json_atomic(tmp_path / "missing" / "x.json", {})
