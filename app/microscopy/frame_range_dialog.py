"""Ask for a frame range to ignore, for the selected spherulite or the whole experiment.

Frames are shown 1-based like the viewer's readout; :meth:`FrameRangeDialog.range`
returns the 0-based inclusive range the edit records use.
"""

from __future__ import annotations

from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QRadioButton,
    QSpinBox,
    QVBoxLayout,
)


class FrameRangeDialog(QDialog):
    def __init__(self, frame_count: int, current_frame: int, selected_id: int, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Ignore frames")
        self.first = QSpinBox(minimum=1, maximum=max(1, frame_count), value=current_frame + 1)
        self.last = QSpinBox(minimum=1, maximum=max(1, frame_count), value=current_frame + 1)
        self.whole = QRadioButton("the whole experiment (focus loss, temperature overshoot)")
        self.one = QRadioButton(f"spherulite #{selected_id} only" if selected_id >= 0
                                else "one spherulite (select it first)")
        self.one.setEnabled(selected_id >= 0)
        # The whole experiment unless the user picks the selected spherulite: a selection
        # left over from earlier must not silently narrow the edit.
        self.whole.setChecked(True)
        form = QFormLayout()
        form.addRow("First frame", self.first)
        form.addRow("Last frame", self.last)
        buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        layout.addWidget(self.one)
        layout.addWidget(self.whole)
        layout.addWidget(buttons)

    def range(self) -> tuple[int, int]:
        """(first, last) 0-based, inclusive, in order."""
        a, b = self.first.value() - 1, self.last.value() - 1
        return min(a, b), max(a, b)

    def whole_experiment(self) -> bool:
        return self.whole.isChecked()
