"""The one error type for bad user input.

Anything a user can get wrong (a corrupt file, a missing column, a zero calibration)
raises :class:`InputError`. Its message is one line that names the file (when there is
one) and the problem; the CLI prints it and exits 2, the GUI shows it in a dialog.
Anything else escaping the analysis core is a bug (exit 1).
"""

from __future__ import annotations

import os


class InputError(ValueError):
    """Bad user input: one clear line naming the file and the problem."""

    def __init__(self, problem: str, path: str | os.PathLike | None = None):
        self.problem = problem
        self.path = None if path is None else os.fspath(path)
        super().__init__(f"{self.path}: {problem}" if self.path else problem)
