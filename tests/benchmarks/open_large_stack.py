"""Benchmark: opening a 4 GB TIFF stack must cost only its header.

Writes a sparse 4 GiB ImageJ stack (1024 frames of 2048 × 2048 uint8; the data are
holes in the file, so it takes no disk space on Linux), then times `open_stack`, one
random frame read and `spherokin info`. Run: `.venv/bin/python tests/benchmarks/open_large_stack.py`.
"""

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import tifffile

from analysis.stack.frames import open_stack

FRAMES, SIZE = 1024, 2048


def main() -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "big.tif"
        tifffile.memmap(path, shape=(FRAMES, SIZE, SIZE), dtype="uint8", imagej=True,
                        resolution=(1 / 0.65, 1 / 0.65),
                        metadata={"axes": "TYX", "unit": "um", "finterval": 5.0}).flush()
        size_gib = os.path.getsize(path) / 2**30
        start = time.perf_counter()
        stack = open_stack(path)
        opened = time.perf_counter() - start
        start = time.perf_counter()
        stack[FRAMES // 2].sum()
        one_frame = time.perf_counter() - start
        start = time.perf_counter()
        subprocess.run([sys.executable, "-m", "analysis.cli.main", "info", str(path)], check=True,
                       capture_output=True)
        cli = time.perf_counter() - start
    print("| measure | value |\n|---|---|")
    print(f"| stack size | {size_gib:.2f} GiB ({FRAMES} × {SIZE}² uint8) |")
    print(f"| open_stack | {opened * 1000:.1f} ms |")
    print(f"| read one frame | {one_frame * 1000:.1f} ms |")
    print(f"| `spherokin info` (whole process) | {cli * 1000:.0f} ms |")


if __name__ == "__main__":
    main()
