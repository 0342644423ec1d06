"""The stack viewer: frames of the current experiment with the detections over them.

Frame slider, play/pause with a speed, frame and time readout (time counted from the
isothermal start), zoom/pan (wheel, drag), contrast (auto or black/white levels), colour
or grey, a µm scale bar and a time stamp, and toggles for each overlay. Clicks on the
image are reported as ``image_clicked(x_px, y_px)``; what they do is the tool
controller's business (``app.microscopy.tools``).

Run alone: ``python -m app.microscopy.viewer PROJECT``.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QHBoxLayout,
    QLabel,
    QMenu,
    QPushButton,
    QSizePolicy,
    QSlider,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from analysis.errors import InputError
from app.core import model as m
from app.core.errors import failure_line
from app.core.ramp_inputs import RAMPS
from app.microscopy.annotations import ViewAnnotations, format_clock
from app.microscopy.frame_cache import FrameCache, auto_levels
from app.microscopy.overlays import (
    STATUS_COLOURS,
    STATUS_WORDS,
    OverlayLayer,
    marks_from_result,
)

pg.setConfigOptions(imageAxisOrder="row-major")

SPEEDS_FPS = (2, 5, 10, 20, 40)
OVERLAY_TOGGLES = (("fronts", "Fronts"), ("centres", "Centres"), ("ids", "Ids"),
                   ("scale", "Scale bar"), ("clock", "Time stamp"))


def status_legend() -> QLabel:
    """A one-line key of the overlay colours (+ automatic, ◆ manual)."""
    parts = [f"<span style='color:{colour}'>●</span>&nbsp;{status}"
             for status, colour in STATUS_COLOURS.items()]
    label = QLabel("&nbsp;&nbsp;".join(parts) + "&nbsp;&nbsp;+ auto&nbsp;&nbsp;◆ manual")
    label.setToolTip("<br>".join(f"{s}: {w}" for s, w in STATUS_WORDS.items()))
    label.setSizePolicy(QSizePolicy.Ignored, QSizePolicy.Preferred)  # never widens the viewer
    return label


class StackViewer(QWidget):
    """Shows experiment ``model.current_index`` frame by frame with overlays."""

    frame_changed = Signal(int)
    image_clicked = Signal(float, float)  # x_px (column), y_px (row) on frame 0's grid
    locate_requested = Signal()  # the stack file is missing: the user wants to point to it

    def __init__(self, model: "m.ProjectModel", parent: QWidget | None = None):
        super().__init__(parent)
        self._model = model
        self._index = -1
        self._cache: FrameCache | None = None
        self._frame = 0
        self._times_s: np.ndarray | None = None
        self._um_per_px: float | None = None
        self.show_rejected = False  # rejected candidates are hidden until asked for
        self._programme = None  # TemperatureProgramme of a ramp experiment
        self._build()
        model.selection_changed.connect(self._on_selection_changed)
        model.analysis_updated.connect(self._on_analysis_updated)
        model.experiment_changed.connect(self._on_experiment_changed)
        model.project_replaced.connect(lambda: self.load_experiment(model.current_index))
        model.experiments_removed.connect(lambda *_: self.load_experiment(model.current_index))
        self.load_experiment(model.current_index)

    # ---------------------------------------------------------------- construction
    def _build(self) -> None:
        self._graphics = pg.GraphicsView(background="#14161c")
        self.view_box = pg.ViewBox(lockAspect=True, invertY=True, enableMenu=False)
        self._graphics.setCentralItem(self.view_box)
        self.image_item = pg.ImageItem(axisOrder="row-major")
        self.view_box.addItem(self.image_item)
        self.overlay = OverlayLayer(self.view_box)
        self.annotations = ViewAnnotations(self.view_box)
        self._graphics.scene().sigMouseClicked.connect(self._on_scene_clicked)
        self._banner = QLabel()
        self._banner.setWordWrap(True)
        self._banner.setStyleSheet("background:#5a4300; color:#ffe9a8; padding:4px;")
        self._banner.hide()
        self.locate_button = QPushButton("Locate file…")
        self.locate_button.setObjectName("locate_stack")
        self.locate_button.setToolTip("Point to the stack file where it is now (one undo step)")
        self.locate_button.clicked.connect(self.locate_requested)
        self.locate_button.hide()
        banner = QHBoxLayout()
        banner.addWidget(self._banner, 1)
        banner.addWidget(self.locate_button)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(2)
        layout.addLayout(banner)
        layout.addLayout(self._build_display_row())
        layout.addWidget(status_legend())
        layout.addWidget(self._graphics, 1)
        layout.addLayout(self._build_time_row())
        layout.addWidget(self._build_temperature_strip())
        self._play_timer = QTimer(self)
        self._play_timer.timeout.connect(self._advance)

    def _build_display_row(self) -> QHBoxLayout:
        row = QHBoxLayout()
        self.auto_contrast = QCheckBox("Auto contrast")
        self.auto_contrast.setChecked(True)
        self.black_level = QDoubleSpinBox(decimals=1, maximum=1e9, minimum=-1e9)
        self.white_level = QDoubleSpinBox(decimals=1, maximum=1e9, minimum=-1e9)
        for box, tip in ((self.black_level, "black level"), (self.white_level, "white level")):
            box.setMaximumWidth(90)
            box.setToolTip(f"Manual {tip} (untick Auto contrast)")
            box.valueChanged.connect(self._on_manual_levels)
        self.auto_contrast.toggled.connect(self._on_auto_toggled)
        self.grey_box = QCheckBox("Grey")
        self.grey_box.setToolTip("Show colour frames as grey (luminance)")
        self.grey_box.toggled.connect(self._on_grey_toggled)
        row.addWidget(self.auto_contrast)
        row.addWidget(QLabel("black"))
        row.addWidget(self.black_level)
        row.addWidget(QLabel("white"))
        row.addWidget(self.white_level)
        row.addWidget(self.grey_box)
        row.addStretch(1)
        self.overlay_button = QToolButton(text="Overlays")
        self.overlay_button.setPopupMode(QToolButton.InstantPopup)
        menu = QMenu(self.overlay_button)
        self.overlay_actions = {}
        for name, text in OVERLAY_TOGGLES:
            action = menu.addAction(text)
            action.setCheckable(True)
            action.setChecked(True)
            action.toggled.connect(lambda on, n=name: self.set_overlay_visible(n, on))
            self.overlay_actions[name] = action
        self.overlay_button.setMenu(menu)
        row.addWidget(self.overlay_button)
        return row

    def _build_time_row(self) -> QHBoxLayout:
        row = QHBoxLayout()
        self.play_button = QToolButton(text="Play")
        self.play_button.setCheckable(True)
        self.play_button.setToolTip("Play / pause (Space)")
        self.play_button.toggled.connect(self.set_playing)
        self.speed = QComboBox()
        self.speed.addItems([f"{fps} fps" for fps in SPEEDS_FPS])
        self.speed.setCurrentIndex(2)
        self.speed.currentIndexChanged.connect(self._on_speed_changed)
        self.slider = QSlider(Qt.Horizontal)
        self.slider.valueChanged.connect(self.set_frame)
        self.readout = QLabel("no stack")
        self.readout.setMinimumWidth(250)
        row.addWidget(self.play_button)
        row.addWidget(self.speed)
        row.addWidget(self.slider, 1)
        row.addWidget(self.readout)
        return row

    def _build_temperature_strip(self) -> pg.PlotWidget:
        """The film temperature of a ramp experiment against the recording time, with the
        current frame marked (hidden for isothermal experiments)."""
        strip = pg.PlotWidget(background="#ffffff")
        strip.setFixedHeight(96)
        item = strip.getPlotItem()
        item.setLabel("left", "T", units="°C")
        item.setLabel("bottom", "recording time", units="s")
        item.showGrid(x=True, y=True, alpha=0.25)
        item.setMenuEnabled(False)
        strip.setMouseEnabled(x=False, y=False)
        self._temperature_curve = item.plot([], [], pen=pg.mkPen("#b03a2e", width=1.6))
        self._frame_marker = pg.InfiniteLine(angle=90, movable=False, pen=pg.mkPen("#1b4f72", width=1.2))
        item.addItem(self._frame_marker)
        strip.setToolTip("Film temperature from the experiment's stage log or typed programme "
                         "(lag-corrected); the blue line is the frame shown")
        strip.hide()
        self.temperature_strip = strip
        return strip

    # ---------------------------------------------------------------- public
    @property
    def frame(self) -> int:
        return self._frame

    def frame_count(self) -> int:
        return len(self._cache) if self._cache is not None else 0

    def time_from_start_s(self, frame: int | None = None) -> float | None:
        """Time of ``frame`` (default: current) counted from the isothermal start, s."""
        if self._times_s is None or self._index < 0:
            return None
        frame = self._frame if frame is None else frame
        start = self._model.experiment(self._index).isothermal_start_s
        return float(self._times_s[frame]) - float(start or 0.0)

    def load_experiment(self, index: int) -> None:
        """Open experiment ``index``'s stack (lazily) and show its frame 0."""
        self.set_playing(False)
        self._index, self._cache, self._times_s, self._um_per_px = index, None, None, None
        self.image_item.clear()
        problems = []
        self.locate_button.hide()
        if index >= 0:
            problems = self._open_stack(index)
        problems += self._load_programme(index)
        self._show_problems(problems)
        count = self.frame_count()
        self.slider.blockSignals(True)
        self.slider.setRange(0, max(0, count - 1))
        self.slider.setValue(0)
        self.slider.blockSignals(False)
        self._refresh_marks()
        self._frame = 0
        if count:
            self.show_frame(0, autorange=True)
        else:
            self.readout.setText("no stack")

    def set_frame(self, frame: int) -> None:
        if self._cache is None:
            return
        frame = int(np.clip(frame, 0, self.frame_count() - 1))
        if self.slider.value() != frame:
            self.slider.setValue(frame)  # re-enters through valueChanged
            return
        self.show_frame(frame)

    def show_frame(self, frame: int, autorange: bool = False) -> None:
        """Draw frame ``frame`` with its overlays (the scrub hot path)."""
        self._frame = frame
        image = self._cache.frame(frame)
        if self.auto_contrast.isChecked():
            levels = auto_levels(image)
            self._show_levels(levels)
        else:
            levels = (self.black_level.value(), self.white_level.value())
        self.image_item.setImage(image, autoLevels=False, levels=levels)
        if autorange:
            self.view_box.autoRange(padding=0.01)
        self._update_overlay_frame(frame)
        self.frame_changed.emit(frame)

    def set_show_rejected(self, shown: bool) -> None:
        """Show or hide the rejected candidates (hidden by default)."""
        self.show_rejected = bool(shown)
        self._refresh_marks()
        if self._cache is not None:
            self._update_overlay_frame(self._frame)

    def focus_on(self, x_px: float, y_px: float, frame: int, half_width_px: float) -> None:
        """Show ``frame`` zoomed on a square of ±``half_width_px`` around (x, y) on frame 0's
        grid (moved with the specimen's drift in that frame)."""
        if self._cache is None:
            return
        self.set_frame(frame)
        analysis = self._model.analysis(self._index)
        shifts = getattr(getattr(analysis, "arrival", None), "shifts_px", None)
        dy, dx = (float(v) for v in shifts[self._frame]) if shifts is not None and self._frame < len(shifts) \
            else (0.0, 0.0)
        half = max(float(half_width_px), 20.0)
        self.view_box.setRange(xRange=(x_px + dx - half, x_px + dx + half),
                               yRange=(y_px + dy - half, y_px + dy + half), padding=0.0)

    def set_overlay_visible(self, name: str, visible: bool) -> None:
        if name == "scale":
            self.annotations.show_scale_bar = visible
        elif name == "clock":
            self.annotations.show_time_stamp = visible
        else:
            self.overlay.set_visible(name, visible)
        self.annotations.update()

    def set_playing(self, playing: bool) -> None:
        if playing and self.frame_count() > 1:
            self._on_speed_changed()
            self._play_timer.start()
        else:
            self._play_timer.stop()
        self.play_button.blockSignals(True)
        self.play_button.setChecked(self._play_timer.isActive())
        self.play_button.setText("Pause" if self._play_timer.isActive() else "Play")
        self.play_button.blockSignals(False)

    def toggle_playing(self) -> None:
        self.set_playing(not self._play_timer.isActive())

    def step(self, delta: int) -> None:
        self.set_frame(self._frame + delta)

    # ---------------------------------------------------------------- internals
    def _open_stack(self, index: int) -> list[str]:
        experiment = self._model.experiment(index)
        try:
            stack = self._model.frame_stack(index)
        except Exception as exc:  # listed on the page; a bug is logged as one
            self.locate_button.show()
            return [f"Cannot read the stack of {experiment.name}: {failure_line(exc, 'reading frames')}"]
        self._cache = FrameCache(stack)
        self._cache.set_grey(self.grey_box.isChecked())
        self._times_s = None if stack.times_s is None else np.asarray(stack.times_s, float)
        self._um_per_px = stack.um_per_px
        problems = []
        if stack.um_per_px is None:
            problems.append(f"{experiment.name}: the stack has no scale (µm per pixel). "
                            "Set it in Properties or with the calibration tool; "
                            "nothing is measured in µm until then.")
        if stack.times_s is None:
            problems.append(f"{experiment.name}: no frame times. Set the frame interval "
                            "or the times in Properties.")
        return problems

    def _load_programme(self, index: int) -> list[str]:
        """Show the temperature strip for a ramp experiment; problems for the banner."""
        self._programme = None
        self.temperature_strip.hide()
        if index < 0:
            return []
        experiment = self._model.experiment(index)
        programme, problem = RAMPS.programme(experiment)
        if problem:
            return [f"{experiment.name}: temperature log not usable: {problem}"]
        if programme is None or self._times_s is None:
            return []
        self._programme = programme
        t = np.linspace(float(self._times_s[0]), float(self._times_s[-1]), 400)
        self._temperature_curve.setData(t, programme.temperature_at(t))
        self.temperature_strip.show()
        return []

    def _show_problems(self, problems: list[str]) -> None:
        self._banner.setText("\n".join(problems))
        self._banner.setVisible(bool(problems))

    def _refresh_marks(self) -> None:
        result = self._model.result(self._index) if self._index >= 0 else None
        territories = result.extra.get("territories") if result is not None else None
        self.overlay.set_marks(marks_from_result(result, show_rejected=self.show_rejected),
                               self._model.selected_id, territories)

    def _update_overlay_frame(self, frame: int) -> None:
        time_s = self.time_from_start_s(frame)
        analysis = self._model.analysis(self._index) if self._index >= 0 else None
        shifts = getattr(getattr(analysis, "arrival", None), "shifts_px", None)
        if shifts is not None and frame < len(shifts):
            self.overlay.set_offset(float(shifts[frame][1]), float(shifts[frame][0]))
        result = getattr(analysis, "result", None)
        # fronts were fitted in µm with the analysis's own scale: convert back with it
        scale = result.um_per_px if result is not None else self._um_per_px
        self.overlay.update_fronts(time_s, scale)
        self._update_readout(frame, time_s)

    def _update_readout(self, frame: int, time_s: float | None) -> None:
        count = self.frame_count()
        clock = "t unknown" if time_s is None else f"t = {format_clock(time_s)} ({time_s:.1f} s)"
        if self._programme is not None and self._times_s is not None:
            recording_s = float(self._times_s[frame])
            self._frame_marker.setValue(recording_s)
            clock += f"   T = {float(self._programme.temperature_at(recording_s)):.1f} °C"
        self.readout.setText(f"frame {frame + 1} / {count}   {clock}")
        self.readout.setToolTip("Time is counted from the moment the sample reached Tc "
                                "(the experiment's isothermal start)")
        stamp = "" if time_s is None else f"t = {format_clock(time_s)}"
        self.annotations.set_state(um_per_px=self._um_per_px, time_text=stamp)

    def _show_levels(self, levels: tuple) -> None:
        for box, value in zip((self.black_level, self.white_level), levels):
            box.blockSignals(True)
            box.setValue(value)
            box.blockSignals(False)

    def _on_auto_toggled(self, _on: bool) -> None:
        if self._cache is not None:
            self.show_frame(self._frame)

    def _on_manual_levels(self, _value: float) -> None:
        if self._cache is not None and not self.auto_contrast.isChecked():
            self.image_item.setLevels((self.black_level.value(), self.white_level.value()))

    def _on_grey_toggled(self, grey: bool) -> None:
        if self._cache is not None:
            self._cache.set_grey(grey)
            self.show_frame(self._frame)

    def _on_speed_changed(self, *_args) -> None:
        self._play_timer.setInterval(int(1000 / SPEEDS_FPS[self.speed.currentIndex()]))

    def _advance(self) -> None:
        if self._frame + 1 >= self.frame_count():
            self.set_playing(False)
        else:
            self.set_frame(self._frame + 1)

    def _on_scene_clicked(self, event) -> None:
        if event.button() != Qt.LeftButton or self._cache is None:
            return
        point = self.view_box.mapSceneToView(event.scenePos())
        analysis = self._model.analysis(self._index)
        shifts = getattr(getattr(analysis, "arrival", None), "shifts_px", None)
        dx = dy = 0.0
        if shifts is not None and self._frame < len(shifts):
            dy, dx = float(shifts[self._frame][0]), float(shifts[self._frame][1])
        self.image_clicked.emit(point.x() - dx, point.y() - dy)

    def _on_selection_changed(self, index: int, spherulite_id: int) -> None:
        if index != self._index:
            self.load_experiment(index)
            return
        self.overlay.set_selected(spherulite_id)
        if self._cache is not None:
            self._update_overlay_frame(self._frame)

    def _on_analysis_updated(self, index: int) -> None:
        if index == self._index:
            self._refresh_marks()
            if self._cache is not None:
                self._update_overlay_frame(self._frame)

    def _on_experiment_changed(self, index: int) -> None:
        if index != self._index:
            return
        try:
            same_stack = self._cache is not None and self._model.frame_stack(index) is self._cache.stack
        except InputError:  # an unreadable stack is reported when the frames load
            same_stack = False
        if same_stack:
            return
        frame = self._frame
        self.load_experiment(index)
        self.set_frame(frame)


if __name__ == "__main__":  # pragma: no cover - quick look
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(StackViewer, sys.argv, size=(1000, 800)))
