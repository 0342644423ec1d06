"""Stack loading: TIFF (ImageJ, OME, resolution tags), folders, video, bad input."""

from pathlib import Path

import cv2
import numpy as np
import pytest
import tifffile
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analysis.errors import InputError
from analysis.stack.frames import open_stack


def _frames(n=6, shape=(24, 32), dtype=np.uint8, seed=0):
    rng = np.random.default_rng(seed)
    return rng.integers(0, np.iinfo(dtype).max, size=(n, *shape), dtype=dtype)


def write_imagej(path, data, um_per_px=0.65, interval_s=5.0, rgb=False):
    tifffile.imwrite(
        path, data, imagej=True, resolution=(1 / um_per_px, 1 / um_per_px),
        metadata={"axes": "TYXS" if rgb else "TYX", "unit": "um", "finterval": interval_s},
        photometric="rgb" if rgb else "minisblack",
    )
    return path


def test_imagej_tiff_reports_scale_and_interval_from_the_file(tmp_path):
    data = _frames()
    stack = open_stack(write_imagej(tmp_path / "s.tif", data))
    assert len(stack) == 6 and stack.shape == (6, 24, 32) and stack.dtype == np.uint8
    assert stack.um_per_px == pytest.approx(0.65)
    assert stack.interval_s == pytest.approx(5.0)
    assert stack.times_s.tolist() == [0, 5, 10, 15, 20, 25]
    assert stack.sources["um_per_px"].startswith("file") and stack.sources["times_s"].startswith("file")
    np.testing.assert_array_equal(stack[3], data[3])
    np.testing.assert_array_equal(stack[-1], data[-1])


def test_sixteen_bit_and_rgb_stacks_keep_dtype_and_channels(tmp_path):
    grey16 = _frames(dtype=np.uint16)
    stack = open_stack(write_imagej(tmp_path / "g16.tif", grey16))
    assert stack.dtype == np.uint16 and not stack.is_rgb
    np.testing.assert_array_equal(stack[2], grey16[2])
    rgb = _frames(shape=(16, 20, 3))
    stack = open_stack(write_imagej(tmp_path / "rgb.tif", rgb, rgb=True))
    assert stack.is_rgb and stack.frame_shape == (16, 20, 3)
    np.testing.assert_array_equal(stack[4], rgb[4])


def test_user_values_override_file_metadata(tmp_path):
    stack = open_stack(write_imagej(tmp_path / "s.tif", _frames()), um_per_px=1.3, interval_s=2)
    assert stack.um_per_px == 1.3 and stack.interval_s == 2
    assert stack.sources["um_per_px"] == "user" and stack.sources["times_s"] == "user"
    times = [0, 1, 3, 6, 10, 15]
    stack = open_stack(tmp_path / "s.tif", times_s=times)
    assert stack.times_s.tolist() == times and stack.interval_s is None


def test_ome_tiff_calibration(tmp_path):
    path = tmp_path / "o.ome.tif"
    tifffile.imwrite(path, _frames(), ome=True,
                     metadata={"axes": "TYX", "PhysicalSizeX": 0.5, "PhysicalSizeY": 0.5, "TimeIncrement": 2.0})
    stack = open_stack(path)
    assert stack.um_per_px == 0.5 and stack.interval_s == 2.0
    assert "OME" in stack.sources["um_per_px"]


def test_resolution_tags_in_centimetres_are_read_and_inches_ignored(tmp_path):
    cm = tmp_path / "cm.tif"
    tifffile.imwrite(cm, _frames(), resolution=(10000 / 0.8, 10000 / 0.8), resolutionunit="CENTIMETER")
    assert open_stack(cm).um_per_px == pytest.approx(0.8)
    inch = tmp_path / "inch.tif"
    tifffile.imwrite(inch, _frames(), resolution=(72, 72), resolutionunit="INCH")
    stack = open_stack(inch)
    assert stack.um_per_px is None and stack.sources["um_per_px"] == "missing"
    with pytest.raises(InputError, match="pixel size"):
        stack.require_calibration()


def test_uncompressed_tiff_is_memory_mapped_not_loaded(tmp_path):
    stack = open_stack(write_imagej(tmp_path / "s.tif", _frames(n=50)))
    assert isinstance(stack._source._data, np.memmap)


def test_folder_of_frames_natural_order_and_times_from_names(tmp_path):
    data = _frames(n=12)
    for i, frame in enumerate(data):
        cv2.imwrite(str(tmp_path / f"frame_t{i * 7}s_{i}.png"), frame)
    stack = open_stack(tmp_path, name_pattern=r"_t(\d+)s")
    assert len(stack) == 12
    np.testing.assert_array_equal(stack[10], data[10])  # 10 after 9, not after 1
    assert stack.times_s.tolist() == [7.0 * i for i in range(12)]
    assert stack.sources["times_s"] == "file names"


def test_folder_with_mixed_frame_sizes_names_the_odd_file(tmp_path):
    cv2.imwrite(str(tmp_path / "a1.png"), np.zeros((10, 10), np.uint8))
    cv2.imwrite(str(tmp_path / "a2.png"), np.zeros((12, 10), np.uint8))
    with pytest.raises(InputError, match="a2.png.*differs"):
        open_stack(tmp_path)


def test_empty_folder_is_an_error(tmp_path):
    with pytest.raises(InputError, match="no images"):
        open_stack(tmp_path)


def test_video_frame_rate_gives_interval(tmp_path):
    path = tmp_path / "v.avi"
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"MJPG"), 4.0, (32, 24))
    for frame in _frames(n=5):
        writer.write(cv2.cvtColor(frame, cv2.COLOR_GRAY2BGR))
    writer.release()
    stack = open_stack(path)
    assert len(stack) == 5 and stack.interval_s == pytest.approx(0.25)
    assert stack.frame_shape == (24, 32)
    assert stack[4].shape == (24, 32)


def test_video_without_frames_is_an_error(tmp_path):
    path = tmp_path / "empty.avi"
    path.write_bytes(b"RIFF\x00\x00\x00\x00AVI LIST")
    with pytest.raises(InputError, match="empty.avi"):
        open_stack(path)


@pytest.mark.parametrize("value", [0, -1, float("nan")])
def test_zero_negative_or_nan_calibration_is_refused(tmp_path, value):
    path = write_imagej(tmp_path / "s.tif", _frames())
    with pytest.raises(InputError, match="positive"):
        open_stack(path, um_per_px=value)
    with pytest.raises(InputError, match="positive"):
        open_stack(path, interval_s=value)


def test_truncated_tiff_names_the_file(tmp_path):
    path = write_imagej(tmp_path / "s.tif", _frames(n=20))
    data = path.read_bytes()
    short = tmp_path / "short.tif"
    short.write_bytes(data[: len(data) // 2])
    with pytest.raises(InputError, match="short.tif"):
        open_stack(short)


def test_non_increasing_times_are_refused(tmp_path):
    path = write_imagej(tmp_path / "s.tif", _frames())
    with pytest.raises(InputError, match="increase"):
        open_stack(path, times_s=[0, 1, 1, 2, 3, 4])
    with pytest.raises(InputError, match="6 frames"):
        open_stack(path, times_s=[0, 1, 2])


_VALID = None


def _valid_tiff_bytes() -> bytes:
    global _VALID
    if _VALID is None:
        import io

        buffer = io.BytesIO()
        tifffile.imwrite(buffer, _frames(n=4, shape=(8, 8)), imagej=True,
                         metadata={"axes": "TYX", "unit": "um", "finterval": 1})
        _VALID = buffer.getvalue()
    return _VALID


def _open_and_read_all(path: Path) -> None:
    stack = open_stack(path)
    for frame in stack.iter_frames():
        assert frame.shape == stack.frame_shape
    stack.close()


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cut=st.integers(min_value=0, max_value=10_000), noise=st.binary(max_size=64))
def test_random_truncations_and_bytes_raise_only_input_error(tmp_path, cut, noise):
    valid = _valid_tiff_bytes()
    for index, blob in enumerate((valid[: cut % len(valid)], noise, valid[:8] + noise)):
        path = tmp_path / f"fuzz{index}.tif"
        path.write_bytes(blob)
        try:
            _open_and_read_all(path)
        except InputError as exc:
            assert "fuzz" in str(exc)
