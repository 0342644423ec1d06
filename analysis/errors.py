"""The one error type for bad user input.

Anything a user can get wrong (a corrupt file, a missing column, a zero calibration)
raises :class:`InputError`. Its message is one line that names the file (when there is
one) and the problem; the CLI prints it and exits 2, the GUI shows it in a dialog.
Anything else escaping the analysis core is a bug (exit 1).
"""

from __future__ import annotations

import os
import re

#: Line breaks and other control characters, which a message quoting the user's input
#: (a key, a cell, a file name) could otherwise carry into a second line.
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")


class InputError(ValueError):
    """Bad user input: one clear line naming the file and the problem."""

    def __init__(self, problem: str, path: str | os.PathLike | None = None):
        self.problem = _one_line(problem)
        self.path = None if path is None else os.fspath(path)
        super().__init__(_one_line(f"{self.path}: {self.problem}") if self.path else self.problem)


def _one_line(text: str) -> str:
    """``text`` on one line: line breaks and tabs become spaces, other control characters
    are shown as their escapes."""
    text = re.sub(r"[\r\n\t]+", " ", str(text))
    return _CONTROL.sub(lambda m: repr(m.group())[1:-1], text)
