"""Small generic helpers every layer uses: unit conversions, JSON cleaning, atomic writes.

A leaf module: it imports only the standard library, numpy and ``analysis.errors``.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from pathlib import Path
from typing import Any, Callable

import numpy as np

from analysis.errors import InputError


# ---------------------------------------------------------------- units
def per_mm3_from_per_mm2(value_per_mm2: float | None, thickness_um: float | None) -> float | None:
    """A film count per mm^2 as a volumetric one per mm^3: N_V = N_A / h (docs/sources.md §1.7).

    Used for nucleus densities and nucleation rates alike (the rate's per-minute unit is
    carried along). Assumes every nucleus through the film thickness ``h`` (µm) is seen in
    transmission and none sits on the glass. None when either input is unknown or h <= 0.
    """
    if value_per_mm2 is None or not thickness_um or thickness_um <= 0:
        return None
    return value_per_mm2 / (thickness_um * 1e-3)


# ---------------------------------------------------------------- JSON
def json_clean(value: Any) -> Any:
    """A JSON-safe copy: NaN and infinities become None, numpy scalars and arrays plain
    Python, tuples lists; dict keys are kept. Recursive."""
    if isinstance(value, dict):
        return {key: json_clean(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_clean(item) for item in value]
    if isinstance(value, np.ndarray):
        return [json_clean(item) for item in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


def json_text(doc: Any, *, indent: int = 2) -> str:
    """``doc`` cleaned by :func:`json_clean` as JSON text with a final newline (UTF-8 kept)."""
    return json.dumps(json_clean(doc), indent=indent, allow_nan=False, ensure_ascii=False) + "\n"


# ---------------------------------------------------------------- atomic writes
def write_atomic(path, write: Callable[[Path], Any]) -> Path:
    """Write a file through ``write(temporary_path)``, then rename it over ``path``.

    The temporary file sits in the same folder and keeps the suffix (so writers that
    choose the format from it, such as image and figure savers, still work); it is
    flushed to disk before the rename, so an interrupted write never damages an earlier
    good file. An existing file keeps its permissions. A missing or unwritable folder is
    an :class:`InputError` naming the file.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("the folder does not exist", path)
    try:
        handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=f".part{path.suffix}",
                                        dir=folder)
    except OSError as error:
        raise InputError(f"cannot write here ({error.strerror or error})", path) from None
    os.close(handle)
    temporary = Path(name)
    try:
        os.chmod(temporary, _file_mode(path))
        write(temporary)
        with open(temporary, "rb+") as stream:
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except OSError as error:
        raise InputError(f"could not write the file ({error.strerror or error})", path) from None
    finally:
        temporary.unlink(missing_ok=True)
    return path


def write_bytes_atomic(path, data: bytes) -> Path:
    """:func:`write_atomic` for bytes already in memory."""
    return write_atomic(path, lambda temporary: temporary.write_bytes(data))


def write_text_atomic(path, text: str) -> Path:
    """:func:`write_atomic` for UTF-8 text."""
    return write_bytes_atomic(path, text.encode("utf-8"))


def write_csv_atomic(path, rows) -> Path:
    """UTF-8 CSV (header first in ``rows``), cells written as given, atomically."""
    import csv

    def write(temporary: Path) -> None:
        with open(temporary, "w", newline="", encoding="utf-8") as stream:
            csv.writer(stream).writerows(rows)

    return write_atomic(path, write)


def write_json_atomic(path, doc: Any) -> Path:
    """``doc`` as cleaned JSON (:func:`json_text`), written atomically."""
    return write_text_atomic(path, json_text(doc))


def _file_mode(path: Path) -> int:
    """Keep an existing file's permissions; new files get the usual umask-based mode.

    mkstemp creates files readable by the owner only, which would silently hide a shared
    project or report from colleagues after the first save.
    """
    try:
        return path.stat().st_mode & 0o777
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask
