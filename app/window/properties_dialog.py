"""Editor of one experiment's properties: Tc and its stage-temperature uncertainty (empty:
the project's), scale, frame times, isothermal start, film thickness, notes. OK applies every change as one undo entry.

Empty optional fields mean "not set": the scale and the frame interval then come from the
stack file, if it has them; the viewer warns when a stack ends up without a scale.

Run alone: ``python -m app.window.properties_dialog PROJECT [INDEX]``.
"""

from __future__ import annotations

import math
from typing import Any

from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QLabel,
    QLineEdit,
    QMessageBox,
    QPlainTextEdit,
    QVBoxLayout,
)

from analysis.errors import InputError
from analysis.settings import MAX_STAGE_UNCERTAINTY_K

NUMBER_FIELDS = (
    # field, label, positive, may be empty
    ("temperature_c", "Crystallization temperature Tc (°C)", False, True),
    ("stage_uncertainty_k", "Stage-temperature uncertainty ± (K)", False, True),
    ("um_per_px", "Scale (µm per pixel)", True, True),
    ("interval_s", "Frame interval (s)", True, True),
    ("isothermal_start_s", "Isothermal start (s on the recording clock)", False, False),
    ("thickness_um", "Film thickness (µm)", True, True),
)


PLACEHOLDERS = {"um_per_px": "from the file",
                "stage_uncertainty_k": "the project's value (Tc-series page)"}


def parse_optional_number(text: str, what: str, *, positive: bool, optional: bool) -> float | None:
    """A float from a text field; None for an empty optional field; InputError otherwise."""
    text = text.strip()
    if text.count(",") == 1 and "." not in text:  # a decimal comma
        text = text.replace(",", ".")
    if not text:
        if optional:
            return None
        raise InputError(f"{what} is required")
    try:
        value = float(text)
    except ValueError:
        raise InputError(f"{what}: {text!r} is not a number") from None
    if not math.isfinite(value) or (positive and value <= 0):
        raise InputError(f"{what} must be a positive number, got {text!r}")
    return value


def parse_times(text: str) -> tuple[float, ...] | None:
    """Frame times 'a b c' or 'a, b, c' (s); strictly increasing; None when empty."""
    parts = text.replace(",", " ").replace(";", " ").split()
    if not parts:
        return None
    try:
        times = tuple(float(p) for p in parts)
    except ValueError:
        raise InputError("frame times must be numbers in seconds, separated by spaces or commas") from None
    if any(not math.isfinite(t) for t in times) or any(b <= a for a, b in zip(times, times[1:])):
        raise InputError("frame times must be finite and strictly increasing")
    return times


def _format(value: Any) -> str:
    return "" if value is None else f"{value:g}"


class PropertiesDialog(QDialog):
    """Form for one experiment; :meth:`changes` gives the fields that differ."""

    def __init__(self, experiment: Any, stack_note: str = "", parent=None):
        super().__init__(parent)
        self.setWindowTitle(f"Properties of {experiment.name}")
        self._experiment = experiment
        form = QFormLayout()
        self.name = QLineEdit(experiment.name)
        form.addRow("Name", self.name)
        self.numbers = {}
        for field, label, _positive, optional in NUMBER_FIELDS:
            edit = QLineEdit(_format(getattr(experiment, field)))
            if optional:
                edit.setPlaceholderText(PLACEHOLDERS.get(field, "not set"))
            self.numbers[field] = edit
            form.addRow(label, edit)
        self.times = QLineEdit(" ".join(f"{t:g}" for t in experiment.times_s or ()))
        self.times.setPlaceholderText("optional: one time per frame (s), overrides the interval")
        form.addRow("Frame times (s)", self.times)
        self.notes = QPlainTextEdit(experiment.notes)
        self.notes.setFixedHeight(80)
        form.addRow("Notes", self.notes)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        if stack_note:
            note = QLabel(stack_note)
            note.setWordWrap(True)
            layout.addWidget(note)
        buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel)
        buttons.accepted.connect(self._accept_if_valid)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)

    def changes(self) -> dict[str, Any]:
        """Fields whose value differs from the experiment (InputError on bad input)."""
        values: dict[str, Any] = {"name": self.name.text().strip() or self._experiment.name,
                                  "notes": self.notes.toPlainText()}
        for field, label, positive, optional in NUMBER_FIELDS:
            values[field] = parse_optional_number(self.numbers[field].text(), label,
                                                  positive=positive, optional=optional)
        u_t = values["stage_uncertainty_k"]
        if u_t is not None and not 0 <= u_t <= MAX_STAGE_UNCERTAINTY_K:
            raise InputError(f"Stage-temperature uncertainty must be between 0 and "
                             f"{MAX_STAGE_UNCERTAINTY_K:g} K, got {u_t:g}")
        values["times_s"] = parse_times(self.times.text())
        return {k: v for k, v in values.items() if v != getattr(self._experiment, k)}

    def _accept_if_valid(self) -> None:
        try:
            self.changes()
        except InputError as exc:
            QMessageBox.warning(self, "Check the properties", str(exc))
            return
        self.accept()


def stack_note(stack: Any) -> str:
    """One-paragraph note on where the stack's calibration and times came from."""
    if stack is None:
        return ""
    parts = [f"{len(stack)} frames of {stack.frame_shape[1]}×{stack.frame_shape[0]} px"]
    scale = "no scale in the file" if stack.um_per_px is None else f"{stack.um_per_px:g} µm/px"
    parts.append(f"scale: {scale} ({stack.sources.get('um_per_px', 'not found')})")
    if stack.interval_s is not None:
        parts.append(f"interval {stack.interval_s:g} s ({stack.sources.get('interval_s', '')})")
    return "Stack: " + "; ".join(parts) + "."


if __name__ == "__main__":  # pragma: no cover
    import sys

    from PySide6.QtWidgets import QApplication

    from app.core.model import ProjectModel

    app = QApplication(sys.argv)
    shared = ProjectModel()
    shared.open_project(sys.argv[1])
    index = int(sys.argv[2]) if len(sys.argv) > 2 else 0
    dialog = PropertiesDialog(shared.experiment(index), stack_note(shared.frame_stack(index)))
    if dialog.exec():
        print(dialog.changes())
