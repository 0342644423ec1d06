"""Details of the current experiment: summary, spherulite table and the edit list.

The summary describes the selected spherulite (or the experiment when none is
selected). The spherulite table shows every detection with its ``source`` (auto or
manual); the edit list shows the user's corrections in order and marks those the last
analysis could not apply, so none is ever silently lost.

Run alone: ``python -m app.microscopy.details_panel PROJECT``.
"""

from __future__ import annotations

import html
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QPushButton,
    QTabWidget,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from analysis.errors import InputError
from analysis.kinetics.prediction import film_avrami_fit, predict_from_result
from analysis.results import COUNTS
from app.core import model as m
from app.microscopy.overlays import STATUS_WORDS
from app.microscopy.spherulite_table import SpherulitesTable
from app.widgets.formatting import fmt, fmt_interval, fmt_pm, k_unit

UNAPPLIED_COLOUR = "#ffb0b0"


def _num(value: Any, fmt: str = ".3g", unit: str = "") -> str:
    return "—" if value is None else f"{value:{fmt}}{unit}"


def spherulite_html(s: Any, um_per_px: float | None, free_radii: int | None = None) -> str:
    """The selected spherulite's numbers; ``free_radii``: the count the few-points rule uses."""
    where = f"({s.x_px:.1f}, {s.y_px:.1f}) px"
    if um_per_px:
        where += f" = ({s.x_px * um_per_px:.1f}, {s.y_px * um_per_px:.1f}) µm"
    rows = [
        ("Centre", where),
        ("Nucleation time", _num(s.nucleation_time_s, ".1f", " s from reaching Tc")),
        ("First seen", _num(s.first_seen_s, ".1f", " s")),
        ("Growth rate G", fmt_pm(s.growth_rate_um_per_min, s.growth_rate_ci95_um_per_min, "µm/min")),
        ("R² of the cone fit", _num(s.r2, ".4f")),
        ("Frames in the cone fit", str(s.n_points)),
        ("Free-growth radii", "—" if free_radii is None else str(free_radii)),
        ("Status", f"{s.status}: {s.reason or STATUS_WORDS.get(s.status, '')}"),
        ("Source", s.source),
        ("Confidence", _num(getattr(s, "confidence", None), ".2f") + " (0-1, from its evidence)"),
    ]
    return _table_html(f"Spherulite {s.id}", rows)


def experiment_html(experiment: Any, result: Any, status: str, message: str) -> str:
    rows = [("Tc", _num(experiment.temperature_c, "g", " °C")),
            ("Scale", _num(experiment.um_per_px, ".4g", " µm/px") if experiment.um_per_px
             else "from the file, if it has one"),
            ("Film thickness", _num(experiment.thickness_um, "g", " µm")),
            ("Isothermal start", f"{experiment.isothermal_start_s:g} s on the recording clock"),
            ("Analysis", status + (f": {message}" if message else ""))]
    if result is not None:
        rows += _result_rows(result, experiment)
    body = _table_html(html.escape(experiment.name), rows)
    if result is not None and result.warnings:
        body += "<p><b>Warnings</b><br>" + "<br>".join(map(html.escape, result.warnings)) + "</p>"
    if experiment.notes:
        body += f"<p><b>Notes</b><br>{html.escape(experiment.notes)}</p>"
    return body


def _predicted(result: Any, experiment: Any):
    try:
        return predict_from_result(result, experiment.geometry, experiment.mode_override,
                                   thickness_um=experiment.thickness_um)
    except InputError:
        return None


def _result_rows(result: Any, experiment: Any) -> list[tuple[str, str]]:
    g, nuc = result.growth_rate, result.nucleation
    counts = result.counts()
    rows = [("Frames", str(result.frames)),
            *((COUNTS[key][0], str(value)) for key, value in counts.items()),
            ("Pooled G", fmt_interval(g.value, g.ci95_low, g.ci95_high, "µm/min")),
            ("Nucleation mode", nuc.mode or "—"),
            ("Density", fmt(nuc.density_per_mm2, "mm⁻²") + " | " + fmt(nuc.density_per_mm3, "mm⁻³")),
            ("Nucleation rate", fmt(nuc.rate_per_mm2_per_min, "mm⁻² min⁻¹")),
            ("Induction time", _num(nuc.induction_time_s, ".1f", " s"))]
    if nuc.mode_test:
        rows.append(("Mode test", nuc.mode_test))
    rejected = sum(1 for s in result.spherulites if s.status == "rejected")
    if rejected:
        rows.append(("Rejected candidates", f"{rejected}, not counted (View ▸ Show rejected candidates)"))
    rows += quality_rows(getattr(result, "image_quality", None))
    for label, avrami in (("Avrami, film X(t)", film_avrami_fit(result)),
                          (f"Avrami, predicted {experiment.geometry}", _predicted(result, experiment))):
        if avrami:
            rows.append((label, f"k = {fmt(avrami.k_per_min_n, k_unit(avrami.n))}, "
                                f"t½ = {fmt(avrami.t_half_min, 'min')}"))
    return rows


def quality_rows(quality: Any) -> list[tuple[str, str]]:
    """The image-quality block (measured from the recording) as summary rows."""
    if quality is None:
        return []
    return [("Image quality", quality.verdict),
            ("Signal-to-noise", _num(quality.snr, ".2g", " per pixel and frame")
             + f" (noise {quality.noise:.1%} of full scale"
             + ("" if quality.contrast is None else f", contrast {quality.contrast:.1%}") + ")"),
            ("Smoothing chosen", f"{quality.smoothing_px:.2g} px"),
            ("Not timed", _num(None if quality.unresolved_fraction is None else 100 * quality.unresolved_fraction,
                               ".0f", " % of the crystallised field (inferred from the growth)")),
            ("Edge blur", _num(quality.blur_px, ".2g", " px")),
            ("Uneven illumination", _num(None if quality.illumination_unevenness is None
                                         else 100 * quality.illumination_unevenness, ".0f", " % fall"))]


def _table_html(title: str, rows: list[tuple[str, str]]) -> str:
    cells = "".join(f"<tr><td style='color:#9aa4b2;padding-right:10px'>{html.escape(k)}</td>"
                    f"<td>{html.escape(v)}</td></tr>" for k, v in rows)
    return f"<h3 style='margin:2px 0'>{title}</h3><table>{cells}</table>"


class DetailsPanel(QTabWidget):
    """Summary / Spherulites / Edits tabs for the current experiment."""

    def __init__(self, model: "m.ProjectModel", parent: QWidget | None = None):
        super().__init__(parent)
        self._model = model
        self.summary = QTextBrowser()
        self.table = SpherulitesTable(model)
        self.addTab(self.summary, "Summary")
        self.addTab(self.table, "Spherulites")
        self.addTab(self._build_edits_tab(), "Edits")
        model.selection_changed.connect(lambda *_: self.refresh())
        model.analysis_updated.connect(self._on_index_event)
        model.experiment_changed.connect(self._on_index_event)
        model.status_changed.connect(self._on_status_changed)
        model.project_replaced.connect(self.refresh)
        self.refresh()

    def _build_edits_tab(self) -> QWidget:
        page = QWidget()
        layout = QVBoxLayout(page)
        layout.setContentsMargins(2, 2, 2, 2)
        self.edits_note = QLabel()
        self.edits_note.setWordWrap(True)
        self.edits_list = QListWidget()
        remove = QPushButton("Remove edit")
        remove.setToolTip("Take the selected edit out of the list (undoable)")
        remove.clicked.connect(self._remove_selected_edit)
        row = QHBoxLayout()
        row.addStretch(1)
        row.addWidget(remove)
        layout.addWidget(self.edits_note)
        layout.addWidget(self.edits_list, 1)
        layout.addLayout(row)
        return page

    def _on_index_event(self, index: int) -> None:
        if index == self._model.current_index:
            self.refresh()

    def _on_status_changed(self, index: int) -> None:
        if index == self._model.current_index and self._model.selected_spherulite() is None:
            self._show_summary(index)  # cheap: the tables do not change with the status

    def _show_summary(self, index: int) -> None:
        selected = self._model.selected_spherulite()
        result = self._model.result(index)
        if selected is not None:
            series = next((r for r in result.radii if r.id == selected.id), None)
            self.summary.setHtml(spherulite_html(selected, result.um_per_px,
                                                 None if series is None else series.n_used()))
        else:
            self.summary.setHtml(experiment_html(self._model.experiment(index), result,
                                                 self._model.status(index),
                                                 self._model.status_message(index)))

    def set_show_rejected(self, shown: bool) -> None:
        """List the rejected candidates in the table too (hidden by default)."""
        self.table.set_show_rejected(shown)

    def refresh(self) -> None:
        index = self._model.current_index
        if index < 0:
            self.summary.setHtml("<p>No experiment. Add stacks with File ▸ Add stacks, "
                                 "or drop TIFF files, folders or videos on the window.</p>")
            self.table.fill(None)
            self.edits_list.clear()
            self.edits_note.setText("")
            return
        result = self._model.result(index)
        self._show_summary(index)
        self.table.fill(result)
        self._fill_edits(index, result)

    def _fill_edits(self, index: int, result: Any) -> None:
        edits = self._model.experiment(index).edits
        unapplied = set(result.unapplied_edits) if result is not None else set()
        self.edits_list.clear()
        for position, edit in enumerate(edits):
            text = f"{position + 1}. {m.describe_edit(edit)}"
            item = QListWidgetItem(text)
            if edit in unapplied:
                item.setText(text + "  — NOT APPLIED")
                item.setToolTip("The last analysis found no detection at this point; the "
                                "edit is kept and applies again if one appears.")
                item.setForeground(QBrush(QColor(UNAPPLIED_COLOUR)))
            item.setData(Qt.UserRole, position)
            self.edits_list.addItem(item)
        count = len(unapplied)
        self.edits_note.setText(
            f"{len(edits)} edit(s); {count} not applied by the last analysis." if count
            else f"{len(edits)} edit(s), all applied." if result is not None and edits
            else f"{len(edits)} edit(s).")
        self.setTabText(2, f"Edits ({len(edits)}{', ' + str(count) + ' not applied' if count else ''})")

    def _remove_selected_edit(self) -> None:
        item = self.edits_list.currentItem()
        if item is not None and self._model.current_index >= 0:
            self._model.remove_edit(self._model.current_index, item.data(Qt.UserRole))
