"""The shared text-input checks: regular files only, bounded size, encodings, strict rows."""

from __future__ import annotations

import os

import pytest

from analysis.errors import InputError
from analysis.textio import (
    MAX_FIELDS,
    TEXT_LIMIT_ENV,
    check_field_count,
    decode_text,
    excerpt,
    read_text,
    split_fields,
    text_limit_bytes,
)

TABLE = "temperature_c,growth_rate_um_per_min\n120,1.5\n"


@pytest.mark.parametrize("encoding,bom", [
    ("utf-8", b""), ("utf-8", b"\xef\xbb\xbf"), ("utf-16-le", b"\xff\xfe"),
    ("utf-16-be", b"\xfe\xff"), ("utf-16-le", b""), ("utf-16-be", b""), ("cp1252", b""),
])
def test_common_export_encodings_are_read(tmp_path, encoding, bom):
    path = tmp_path / "t.csv"
    text = TABLE + "# Probe at 23 °C\n"
    path.write_bytes(bom + text.encode(encoding))
    assert read_text(path).replace("\ufeff", "") == text


def test_binary_data_is_refused_naming_the_file(tmp_path):
    path = tmp_path / "noise.csv"
    path.write_bytes(bytes(range(256)) * 20)
    with pytest.raises(InputError, match="binary") as info:
        read_text(path)
    assert str(path) in str(info.value)


def test_folder_is_refused(tmp_path):
    with pytest.raises(InputError, match="is a folder"):
        read_text(tmp_path, "growth-rate table")


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs on this platform")
def test_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    with pytest.raises(InputError, match="pipe"):  # would block forever if opened
        read_text(fifo)


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
def test_device_is_refused():
    with pytest.raises(InputError, match="device"):
        read_text("/dev/zero")


def test_size_limit_and_how_to_raise_it(tmp_path, monkeypatch):
    path = tmp_path / "big.csv"
    path.write_text(TABLE * 2000, encoding="utf-8")
    monkeypatch.setenv(TEXT_LIMIT_ENV, "0.01")
    assert text_limit_bytes() == int(0.01 * 2**20)
    with pytest.raises(InputError, match=TEXT_LIMIT_ENV):
        read_text(path)
    monkeypatch.setenv(TEXT_LIMIT_ENV, "1")
    assert read_text(path).startswith("temperature_c")
    monkeypatch.setenv(TEXT_LIMIT_ENV, "lots")
    with pytest.raises(InputError, match="not a number"):
        text_limit_bytes()


def test_field_count_differing_from_the_header_names_the_line():
    fields = split_fields("124,14,6,0.3", ",")
    with pytest.raises(InputError, match=r"line 7 has 4 fields but the header has 3 \(a decimal comma"):
        check_field_count(fields, 3, line_no=7, line="124,14,6,0.3", path="g.csv")
    check_field_count(split_fields("124,14.6,0.3", ","), 3, line_no=7, line="", path="g.csv")


def test_huge_line_gives_a_short_error():
    line = ",".join(["1"] * 3_000_000)
    with pytest.raises(InputError) as info:
        split_fields(line, ",", line_no=2, path="g.csv")
    message = str(info.value)
    assert "line 2" in message and str(MAX_FIELDS) in message and len(message) < 200


def test_quoted_fields_and_whitespace_runs():
    assert split_fields('"a, b",2', ",", quoted=True) == ["a, b", "2"]
    assert split_fields("  1   2\t3 ", " ") == ["1", "2", "3"]


def test_excerpt_is_bounded():
    assert len(excerpt("x" * 10_000)) < 80
    assert excerpt("short") == "'short'"


def test_decode_keeps_utf8_text_with_accents():
    assert decode_text("Tc (°C)\n".encode("utf-8")) == "Tc (°C)\n"
    assert decode_text(b"") == ""
