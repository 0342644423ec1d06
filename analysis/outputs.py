"""Where results go: output folders checked before any work, written all-or-nothing.

* :func:`prepare_output_folder` is called by every command before it computes anything:
  an ``--out`` that is a file, or a folder that cannot be created or written, is an
  :class:`InputError` at once, not after a long analysis.
* :func:`staged_outputs` gives writers a hidden staging folder inside the output folder;
  only when every file has been written are they moved into place, so a failing writer
  (a full disk, an unwritable name) never leaves half a set of outputs beside an older
  complete one. Staging folders and atomic-save temporaries left by a killed run are
  removed by :func:`remove_stale_temporaries` on the next run or save.
* :func:`clean_text` removes control characters from names and notes before any writer
  sees them (spreadsheet files cannot hold most of them).
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path

from analysis.errors import InputError

__all__ = ["STAGING_PREFIX", "clean_text", "file_stem", "prepare_output_file", "prepare_output_folder",
           "remove_stale_temporaries", "staged_outputs"]

STAGING_PREFIX = ".spherokin-staging-"
#: Temporaries younger than this may belong to a save running in another window.
STALE_AFTER_S = 60.0
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")


def file_stem(name: str, *, max_chars: int = 60) -> str:
    """A file-name-safe version of an experiment or project name (ASCII letters, digits,
    ``._-``; every other run of characters becomes one ``_``), at most ``max_chars`` long."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", name)[:max_chars].strip("._")
    return stem or "experiment"


def clean_text(value: str) -> str:
    """``value`` with control characters (other than tab, LF, CR) replaced by spaces."""
    return _CONTROL.sub(" ", value)


def _check_writable(folder: Path) -> None:
    try:
        handle, probe = tempfile.mkstemp(prefix=".spherokin-probe-", dir=folder)
    except OSError as err:
        raise InputError(f"the output folder is not writable ({err.strerror})", folder) from None
    os.close(handle)
    os.unlink(probe)


def prepare_output_folder(out_dir) -> Path:
    """Create ``out_dir`` if needed and check it can be written; InputError otherwise."""
    folder = Path(out_dir)
    if folder.exists() and not folder.is_dir():
        raise InputError("the output path is a file, not a folder", folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise InputError(f"cannot create the output folder ({err.strerror})", folder) from None
    _check_writable(folder)
    remove_stale_temporaries(folder)
    return folder


def prepare_output_file(path) -> Path:
    """Check a single output file (e.g. a screenshot) can be written at ``path``."""
    target = Path(path)
    if target.is_dir():
        raise InputError("the output path is a folder, not a file", target)
    if target.parent.exists() and not target.parent.is_dir():
        raise InputError("the folder for the output file is a file", target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise InputError(f"cannot create the folder for the output file ({err.strerror})", target) from None
    _check_writable(target.parent)
    return target


def _temporary_pattern(name: str | None) -> re.Pattern:
    """Names of atomic-write temporaries: ``.<name>.<8 random chars>.tmp`` or ``.part<suffix>``."""
    stem = ".+" if name is None else re.escape(name)
    return re.compile(rf"^\.{stem}\.[A-Za-z0-9_]{{8}}\.(?:tmp|part(?:\.[A-Za-z0-9]+)?)$")


def remove_stale_temporaries(folder, name: str | None = None, *,
                             older_than_s: float = STALE_AFTER_S) -> list[Path]:
    """Remove leftovers of interrupted writes in ``folder``; returns what was removed.

    Staging folders of :func:`staged_outputs` and the temporaries of atomic writes
    (those of file ``name`` only, when it is given). Only entries older than
    ``older_than_s`` go, so a save in progress in another window is left alone.
    """
    folder = Path(folder)
    pattern = _temporary_pattern(name)
    removed, now = [], time.time()
    try:
        entries = list(folder.iterdir())
    except OSError:
        return removed
    for entry in entries:
        staging = entry.name.startswith(STAGING_PREFIX)
        if not staging and not pattern.match(entry.name):
            continue
        try:
            if now - entry.lstat().st_mtime < older_than_s:
                continue
            if staging and entry.is_dir() and not entry.is_symlink():
                shutil.rmtree(entry)
            elif not entry.is_dir():
                entry.unlink()
            else:
                continue
        except OSError:
            continue  # another process got there first, or it is not ours to remove
        removed.append(entry)
    return removed


@contextmanager
def staged_outputs(out_dir):
    """Yield a staging folder; on success move its files into ``out_dir``, else drop it."""
    folder = prepare_output_folder(out_dir)
    stage = Path(tempfile.mkdtemp(prefix=STAGING_PREFIX, dir=folder))
    try:
        yield stage
        for entry in sorted(stage.iterdir()):
            os.replace(entry, folder / entry.name)
    except OSError as err:
        raise InputError(f"cannot write the outputs ({err.strerror})", folder) from None
    finally:
        shutil.rmtree(stage, ignore_errors=True)
