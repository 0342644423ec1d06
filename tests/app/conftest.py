"""Shared fixtures of the GUI tests (pytest-qt, offscreen)."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")  # before any QApplication exists

from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture
def demo_project_path() -> Path:
    path = REPO / "sample_images" / "demo.spherokin.json"
    if not path.exists():
        pytest.skip("the demo project is not in sample_images yet")
    return path


def write_disc_stack(path: Path, *, frames: int = 6, size: int = 64, um_per_px: float | None = 2.0,
                     interval_s: float = 10.0, centres=((20, 24), (44, 40)),
                     rate_px_per_frame: float = 3.0) -> Path:
    """A small ImageJ TIFF of bright discs growing linearly on a dark melt."""
    import tifffile

    yy, xx = np.mgrid[0:size, 0:size]
    data = np.zeros((frames, size, size), np.uint8)
    for t in range(frames):
        for cy, cx in centres:
            data[t][(yy - cy) ** 2 + (xx - cx) ** 2 <= (rate_px_per_frame * t) ** 2] = 200
    data += np.random.default_rng(0).integers(0, 20, data.shape, dtype=np.uint8)
    kwargs = {"metadata": {"axes": "TYX", "finterval": interval_s}}
    if um_per_px is not None:  # no unit and no resolution: a stack without a scale
        kwargs["resolution"] = (1 / um_per_px, 1 / um_per_px)
        kwargs["metadata"]["unit"] = "um"
    tifffile.imwrite(path, data, imagej=True, photometric="minisblack", **kwargs)
    return path


@pytest.fixture
def disc_stack(tmp_path) -> Path:
    return write_disc_stack(tmp_path / "discs.tif")


@pytest.fixture
def small_project(tmp_path, disc_stack):
    """A saved two-experiment project on small disc stacks."""
    from dataclasses import replace

    from analysis.project.file import Experiment, new_project, save_project

    second = write_disc_stack(tmp_path / "discs_b.tif", centres=((30, 30),))
    experiments = (
        Experiment(name="Tc 128", stack_path=str(disc_stack), temperature_c=128.0),
        Experiment(name="Tc 132", stack_path=str(second), temperature_c=132.0),
    )
    project = replace(new_project(), experiments=experiments)
    return save_project(project, tmp_path / "small.spherokin.json")
