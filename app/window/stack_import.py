"""New experiments from stack files: TIFF stacks, folders of frames, videos.

Each path is opened once (header only) so a bad file is reported at once, with its
name, instead of at analysis time. A temperature written in the file name ("…_128C.tif",
"Tc=131.5 °C") is taken as a first guess of Tc; the user can change it in Properties.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Iterable

from app.core.errors import failure_line

STACK_SUFFIXES = {".tif", ".tiff", ".avi", ".mp4", ".mov", ".mkv", ".m4v", ".wmv"}
_TEMPERATURE = re.compile(r"(?<![\d.])(\d{2,3}(?:[.,p]\d+)?)\s*(?:°\s*C|deg\s*C|C)(?![a-z])",
                          re.IGNORECASE)


def temperature_from_name(name: str) -> float | None:
    """A crystallization temperature in °C written in a file name, else None."""
    match = _TEMPERATURE.search(name)
    if match is None:
        return None
    return float(match.group(1).replace(",", ".").replace("p", "."))


def is_stack_path(path: str | Path) -> bool:
    path = Path(path)
    return path.is_dir() or path.suffix.lower() in STACK_SUFFIXES


def experiment_for(path: str | Path) -> Any:
    """An Experiment for one stack path (InputError when it cannot be opened)."""
    from analysis.project.file import Experiment
    from analysis.stack.frames import open_stack

    path = Path(path).resolve()
    open_stack(path)  # validates the file now; frames stay unread
    name = path.name if path.is_dir() else path.stem
    return Experiment(name=name, stack_path=str(path), temperature_c=temperature_from_name(name))


def experiments_from_paths(paths: Iterable[str | Path]) -> tuple[list, list[str]]:
    """Experiments for every usable path, and one line per path that failed."""
    experiments, problems = [], []
    for path in paths:
        try:
            experiments.append(experiment_for(path))
        except Exception as exc:  # listed; a bug is logged as one (app.core.errors)
            text = failure_line(exc, "adding stacks")
            problems.append(text if str(path) in text else f"{path}: {text}")
    return experiments, problems
