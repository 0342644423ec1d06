"""Stage temperature logs and typed programmes.

Scientific check: the first-order lag. A sample obeying τ dy/dt = u − y driven by the
ramp u = T0 − q t from the steady state y(0) = u(0) + q τ (the sample already trailing)
stays at y = u + q τ: it trails a cooling block by q τ (the ramp response of a first-order
system, Ogata 2010, Modern Control Engineering, 5th ed., ch. 5 `# from memory`). From
rest instead (y(0) = T0, a hold before the ramp) y = u + q τ (1 − e^(−t/τ)).
"""

import math

import numpy as np
import pytest

from analysis.errors import InputError
from analysis.kinetics.temperature_programme import (
    apply_sensor_lag,
    parse_programme,
    programme_from_segments,
    read_temperature_log,
)


def write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_log_units_from_header_and_clock_offset(tmp_path):
    rows = "".join(f"{t / 60:.6f};{T + 273.15:.3f}\n" for t, T in zip(range(0, 601, 2), np.linspace(140, 120, 301)))
    log = write(tmp_path / "stage.txt", "# stage export\nInstrument;hot stage\n"
                "Time [min];Sample temperature (K)\n" + rows)
    prog = read_temperature_log(log, clock_offset_s=-30.0)
    assert prog.source == "log" and prog.path == str(log)
    assert prog.time_s[0] == pytest.approx(-30.0)
    assert prog.temperature_at(570.0) == pytest.approx(120.0, abs=1e-3)
    assert prog.temperature_at(-30.0) == pytest.approx(140.0, abs=1e-3)
    assert prog.rate_k_per_min(200.0) == pytest.approx(-2.0, rel=2e-3)


def test_columns_by_name_and_index(tmp_path):
    log = write(tmp_path / "log.csv", "stage_c,time_s,setpoint_c\n" +
                "".join(f"{150 - t / 10},{t},{150}\n" for t in range(0, 100)))
    by_name = read_temperature_log(log, time_col="time_s", temperature_col="stage_c")
    by_index = read_temperature_log(log, time_col=1, temperature_col=0)
    assert np.allclose(by_name.temperature_c, by_index.temperature_c)
    assert by_name.temperature_at(50.0) == pytest.approx(145.0)


@pytest.mark.parametrize("body, problem", [
    ("0,140\n1,139.9\n1,139.8\n3,139.7\n", "line 4: time 1 s does not increase"),
    ("0,140\n1,139.9\n2,nan\n3,139.7\n", "line 4: temperature is NaN"),
    ("0,140\n1,139.9\n2,abc\n3,139.7\n", "line 4: temperature 'abc' is not a number"),
    ("0,140\n1,139.9,7\n2,139.8\n3,139.7\n", "line 3 has 3 fields but the header has 2"),
    ("".join(f"{t},{140 - t / 100}\n" for t in range(20)) + "500,135\n501,134.9\n", "line 22: a gap of 481.0 s"),
])
def test_bad_logs_name_the_file_and_the_line(tmp_path, body, problem):
    log = write(tmp_path / "bad.csv", "time (s),temperature (C)\n" + body)
    with pytest.raises(InputError) as err:
        read_temperature_log(log)
    assert problem in str(err.value) and str(log) in str(err.value)


def test_log_that_does_not_cover_the_recording(tmp_path):
    log = write(tmp_path / "short.csv", "time_s,temperature_c\n" + "".join(f"{t},{140 - t / 10}\n" for t in range(60)))
    prog = read_temperature_log(log, clock_offset_s=10.0)
    with pytest.raises(InputError, match="covers 10.0..69.0 s .* frames span 0.0..100.0 s"):
        prog.require_coverage(0.0, 100.0)


def test_not_a_log(tmp_path):
    with pytest.raises(InputError, match="folder"):
        read_temperature_log(tmp_path)
    with pytest.raises(InputError, match="no rows of numbers"):
        read_temperature_log(write(tmp_path / "words.txt", "hello\nworld\n"))


def test_typed_programme_segments():
    start, segments = parse_programme("150, 5:120, hold:60, 2:110")
    prog = programme_from_segments(start, segments, start_s=-10.0)
    # 150 -> 120 at 5 K/min takes 360 s, then 60 s hold, then 10 K at 2 K/min = 300 s
    assert prog.temperature_at([-10.0, 170.0, 350.0, 380.0, 560.0, 710.0, 2000.0]) == pytest.approx(
        [150.0, 135.0, 120.0, 120.0, 115.0, 110.0, 110.0])
    with pytest.raises(InputError, match="RATE:END"):
        parse_programme("150, fast")
    with pytest.raises(InputError, match="must be positive"):
        programme_from_segments(150.0, parse_programme("150, -5:120")[1])


def test_first_order_lag_of_a_ramp():
    """See the module docstring (Ogata 2010, `# from memory`)."""
    tau, q = 5.0, 10.0 / 60.0
    t = np.arange(0.0, 120.0, 0.7)
    block = 140.0 - q * t
    assert apply_sensor_lag(t, block, tau) == pytest.approx(block + q * tau, abs=1e-9)
    from_rest = programme_from_segments(140.0, parse_programme("140, 10:100")[1], start_s=0.0, lag_s=tau)
    tt = np.array([1.0, 5.0, 20.0, 60.0])
    expected = 140.0 - q * tt + q * tau * (1.0 - np.exp(-tt / tau))
    assert from_rest.temperature_at(tt) == pytest.approx(expected, abs=2e-3)
    assert math.isclose(apply_sensor_lag(t, block, 0.0)[5], block[5])
