"""The memory an analysis will need, checked against a budget before any pixel is decoded.

A stack's header declares its frame size and frame count; a 1 MB compressed TIFF can
declare frames of 20000 x 20000 pixels whose analysis would need about a hundred GB. The
analysis calls :func:`check_memory_budget` first and refuses such a stack with one line
that says how much it needs and how to raise the budget; ``spherokin info`` still
describes the stack, because opening it reads only the header.

The estimate is linear in the pixels of one frame and in pixels x frames. Its
coefficients were measured with ``/usr/bin/time`` on simulated 40-frame stacks of 256^2
to 1536^2 px (peak resident memory 179, 212, 381 and 722 MB) and 160 frames of 512^2 px
(272 MB): about 260 bytes per pixel of one frame for the per-pixel state and working
images, about 2 bytes per pixel and frame (1024^2 px: 381 MB at 40 frames, 564 MB at
120; 256^2 px: 179 MB at 40, 190 MB at 320 frames), and 200 MB for the interpreter and
libraries. It is rounded up, not fitted tightly: the aim is to refuse what cannot run,
not to predict the last megabyte.
"""

from __future__ import annotations

import math
import os

from analysis.errors import InputError

__all__ = ["DEFAULT_MEMORY_BUDGET_MB", "MEMORY_BUDGET_ENV", "analysis_memory_bytes",
           "check_memory_budget", "default_budget_bytes", "memory_budget_bytes"]

#: Environment variable with the memory budget of one analysis, MiB.
MEMORY_BUDGET_ENV = "SPHEROKIN_MEMORY_BUDGET_MB"
#: Used when the computer's memory cannot be read.
DEFAULT_MEMORY_BUDGET_MB = 4096
#: Share of the physical memory an analysis may plan for by default: the rest stays for
#: the desktop, the GUI's own images and the estimate's error.
MEMORY_SHARE = 0.75
BYTES_PER_FRAME_PIXEL = 260  # per-pixel state and working images (measured, see above)
BYTES_PER_PIXEL_AND_FRAME = 2  # evidence histories of pixels still crystallising (measured)
BASE_BYTES = 200 * 2**20  # Python, numpy, scipy, OpenCV, scikit-image


def analysis_memory_bytes(frame_shape, n_frames: int, itemsize: int = 1) -> int:
    """Estimated peak memory of analysing a stack, bytes.

    ``frame_shape`` is ``(H, W)`` or ``(H, W, channels)``; ``itemsize`` the bytes of one
    stored sample (two decoded frames are held at a time).
    """
    pixels = int(frame_shape[0]) * int(frame_shape[1])
    channels = int(frame_shape[2]) if len(frame_shape) > 2 else 1
    decoded = 2 * pixels * channels * int(itemsize)
    return (BASE_BYTES + decoded + pixels * BYTES_PER_FRAME_PIXEL
            + pixels * int(n_frames) * BYTES_PER_PIXEL_AND_FRAME)


def default_budget_bytes() -> int:
    """Three quarters of the physical memory, or 4096 MiB where it cannot be read."""
    try:
        physical = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (AttributeError, ValueError, OSError):
        physical = 0
    return int(MEMORY_SHARE * physical) if physical > 0 else DEFAULT_MEMORY_BUDGET_MB * 2**20


def memory_budget_bytes(budget_mb: float | None = None) -> int:
    """The budget: ``budget_mb`` if given, else ``SPHEROKIN_MEMORY_BUDGET_MB``, else
    :func:`default_budget_bytes`."""
    source = "--memory-budget-mb"
    if budget_mb is None:
        text = os.environ.get(MEMORY_BUDGET_ENV, "").strip()
        if not text:
            return default_budget_bytes()
        source = MEMORY_BUDGET_ENV
        try:
            budget_mb = float(text)
        except ValueError:
            raise InputError(f"{MEMORY_BUDGET_ENV}={text[:40]!r} is not a number of MiB") from None
    if not (math.isfinite(budget_mb) and 0 < budget_mb < 2**40):
        raise InputError(f"{source} must be a positive number of MiB, got {budget_mb!r}")
    return int(budget_mb * 2**20)


def check_memory_budget(stack, budget_mb: float | None = None) -> None:
    """:class:`InputError` naming the stack when its analysis would exceed the budget."""
    need = analysis_memory_bytes(stack.frame_shape, len(stack), stack.dtype.itemsize)
    budget = memory_budget_bytes(budget_mb)
    if need <= budget:
        return
    height, width = stack.frame_shape[:2]
    raise InputError(
        f"{len(stack)} frames of {width} x {height} px need about {need / 2**30:.3g} GiB to "
        f"analyse, over the {budget / 2**30:.3g} GiB budget (crop or bin the frames, or raise "
        f"the budget with --memory-budget-mb or {MEMORY_BUDGET_ENV})", stack.path)
