"""The plot panel of the window: projection, slack histogram, C curve, and before against after.

The main window installs it in a dock::

    panel = ViewsPanel(session, bus)
    window.install_views(panel)
    # in closeEvent: panel.shutdown()   (stops a running C curve)

It listens to ``bus.fit_changed`` and ``bus.labels_changed`` and redraws the visible view at
once and the others when they are next shown.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, cast

import numpy as np
import pandas as pd
from PySide6.QtCore import QBuffer, QByteArray, QIODevice, Qt
from PySide6.QtWidgets import (
    QApplication,
    QFileDialog,
    QHeaderView,
    QInputDialog,
    QLabel,
    QPushButton,
    QSplitter,
    QTableView,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door
from reviewer.core.door import COMPARISON_CAUTION as CAUTION
from reviewer.core.door import Comparison, ReviewSession
from reviewer.core.errors import ReviewerError
from reviewer.core.values import FitSettings, display_name
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.c_curve import CCurvePlot
from reviewer.gui.plots import ProjectionPlot, SlackHistogramPlot
from reviewer.gui.table_model import ArrayTableModel, ColumnSpec


def _fmt(value: Any, signed: bool = False) -> str:
    if value is None or (isinstance(value, float) and not np.isfinite(value)):
        return ""
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value))
    if isinstance(value, (int, np.integer)) or (
        isinstance(value, (float, np.floating))
        and float(value).is_integer()
        and abs(float(value)) < 1e12
    ):
        return f"{int(value):+,}" if signed else f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        return f"{float(value):+.4f}" if signed else f"{float(value):.4f}"
    return str(value)


def _is_number(v: Any) -> bool:
    return (
        isinstance(v, (int, float, np.integer, np.floating))
        and not isinstance(v, (bool, np.bool_))
        and bool(np.isfinite(float(v)))
    )


def settings_text(st: FitSettings) -> str:
    """Resolved fit settings in a few words: kernel, C, gamma, class weights, folds, seed."""
    parts = [st.kernel]
    if st.C is not None:
        parts.append(f"C {float(st.C):.4g}")
    if st.kernel in ("rbf", "poly"):
        gamma = st.gamma_value if st.gamma_value is not None else st.gamma
        parts.append(f"gamma {gamma:.4g}" if isinstance(gamma, (int, float)) else f"gamma {gamma}")
    if st.kernel == "poly":
        parts.append(f"degree {st.degree}")
    if st.class_weight:
        parts.append(f"{st.class_weight} weights")
    parts.append(f"{st.folds} folds, seed {st.seed}")
    return ", ".join(parts)


def metric_name(name: str) -> str:
    """A metric's name with any zone or support code in it shown by its display name."""
    return " ".join(display_name(word) if "_" in word else word for word in str(name).split(" "))


class CompareView(QWidget):
    """The baseline fit (source labels) against the latest fit: metrics, rows whose zone
    changed (click one to select it), the caution, and an optional trusted reference."""

    def __init__(
        self, session: ReviewSession, bus: ReviewBus, parent: QWidget | None = None
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.comparison: Comparison | None = None
        self.table: pd.DataFrame | None = None
        self.reference: tuple[pd.DataFrame, str, str] | None = None
        self.reference_scores: dict | None = None

        self.caution = QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet(
            f"QLabel {{ background: {palette.tint(palette.ORANGE, 0.25).name()};"
            f" color: {palette.TEXT}; padding: 6px; border-radius: 3px; }}"
        )
        self.status = QLabel()
        self.status.setWordWrap(True)
        self.metrics = QTableWidget(0, 4)
        self.metrics.setHorizontalHeaderLabels(["metric", "before", "after", "change"])
        self.metrics.verticalHeader().setVisible(False)
        self.metrics.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        # Every column as wide as its text: a metric's name is never cut off; a narrow dock
        # scrolls instead.
        self.metrics.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents
        )
        self.metrics.horizontalHeader().setStretchLastSection(False)

        self.reference_button = QPushButton("Score on a trusted reference file...")
        self.reference_button.setToolTip(
            "A CSV, Parquet or Excel file with an id column and trusted labels; the model's "
            "labels of both fits are scored against it, matched by id"
        )
        self.reference_label = QLabel("No reference file loaded.")
        self.reference_label.setWordWrap(True)
        self.reference_label.setAlignment(Qt.AlignmentFlag.AlignTop)
        side = QWidget()
        side_layout = QVBoxLayout(side)
        side_layout.setContentsMargins(0, 0, 0, 0)
        side_layout.addWidget(self.reference_button)
        side_layout.addWidget(self.reference_label, 1)

        self.changed_model = ArrayTableModel(parent=self)
        self.changed_view = QTableView()
        self.changed_view.setModel(self.changed_model)
        self.changed_view.setSelectionBehavior(QTableView.SelectionBehavior.SelectRows)
        self.changed_view.setSelectionMode(QTableView.SelectionMode.SingleSelection)
        self.changed_view.setSortingEnabled(True)
        self.changed_view.verticalHeader().setVisible(False)
        self.changed_view.clicked.connect(self._on_changed_clicked)
        self.changed_view.activated.connect(self._on_changed_clicked)
        self.changed_title = QLabel("Rows whose zone changed")

        top = QSplitter(Qt.Orientation.Vertical)
        top.addWidget(self.metrics)
        top.addWidget(side)
        top.setStretchFactor(0, 3)
        top.setStretchFactor(1, 1)
        bottom = QWidget()
        bl = QVBoxLayout(bottom)
        bl.setContentsMargins(0, 0, 0, 0)
        bl.addWidget(self.changed_title)
        bl.addWidget(self.changed_view, 1)
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(top)
        split.addWidget(bottom)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addWidget(self.caution)
        layout.addWidget(self.status)
        layout.addWidget(split, 1)
        self.reference_button.clicked.connect(self.choose_reference)

    def refresh(self) -> None:
        s = self.session
        if s.baseline is None or s.latest is None:
            self.comparison = None
            self.table = None
            self.metrics.setRowCount(0)
            self.changed_model.set_columns([])
            self.status.setText("Fit first: the comparison needs a baseline and a latest fit.")
            self._show_reference()
            return
        comp = door.compare(s)
        assert comp is not None  # both fits exist (checked above)
        self.comparison = comp
        self.table = door.metrics_table(comp.metrics)
        new = comp.metrics_new
        # Before | after (the edits alone, baseline's settings) | change, and when the latest
        # fit used other settings: the edits and new settings | change from before.
        headers = ["metric", "before", "after: edits alone", "change"]
        if new is not None:
            headers += ["edits and new settings", "change"]
        self.metrics.setColumnCount(len(headers))
        self.metrics.setHorizontalHeaderLabels(headers)
        lines = list(self.table.itertuples(index=False))
        self.metrics.setRowCount(len(lines) + 1)
        settings_cells = [
            "settings",
            settings_text(comp.before_settings),
            "same as before"
            if comp.after_settings.same_fit_as(comp.before_settings)
            else settings_text(comp.after_settings),
            "",
        ]
        if new is not None and comp.new_settings is not None:
            settings_cells += [settings_text(comp.new_settings), ""]
        rows_cells = [settings_cells]
        for line in lines:
            cells = [
                metric_name(line.metric),
                _fmt(line.before),
                _fmt(line.after),
                _fmt(line.change, True),
            ]
            if new is not None:
                value = new.get(line.metric)
                before = line.before
                change = (
                    float(cast(float, value)) - float(cast(float, before))
                    if _is_number(value) and _is_number(before)
                    else None
                )
                cells += [_fmt(value), _fmt(change, True)]
            rows_cells.append(cells)
        for i, cells in enumerate(rows_cells):
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if i == 0:
                    item.setToolTip(text)
                if j and i:
                    item.setTextAlignment(
                        Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
                    )
                self.metrics.setItem(i, j, item)
        self.metrics.resizeColumnsToContents()
        ch = comp.changed_rows
        rows = ch["row"].to_numpy()
        labels = np.array([None if v is None else str(v) for v in s.labels], dtype=object)
        self.changed_model.set_columns(
            [
                ColumnSpec("row_id", s.roles.id or "row", np.asarray(s.ids, dtype=object)[rows]),
                ColumnSpec("label", "label", labels[rows]),
                ColumnSpec(
                    "zone_before",
                    "zone before",
                    ch["zone_before"].to_numpy(dtype=object),
                    formatter=display_name,
                ),
                ColumnSpec(
                    "zone_after",
                    "zone after",
                    ch["zone_after"].to_numpy(dtype=object),
                    formatter=display_name,
                ),
                ColumnSpec("slack_before", "slack before", ch["slack_before"].to_numpy(float)),
                ColumnSpec("slack_after", "slack after", ch["slack_after"].to_numpy(float)),
                ColumnSpec(
                    "model_label_before",
                    "model's label before",
                    ch["model_label_before"].to_numpy(dtype=object),
                ),
                ColumnSpec(
                    "model_label_after",
                    "model's label after",
                    ch["model_label_after"].to_numpy(dtype=object),
                ),
            ]
        )
        self.changed_rows = rows
        self.changed_view.resizeColumnsToContents()
        self.changed_title.setText(f"Rows whose zone changed: {len(rows):,} (click to select)")
        same = s.baseline is s.latest
        self.status.setText(
            "Before: the first fit, on the labels as loaded. After: the edited labels fitted "
            "with the same settings, so the change is the edits alone"
            + (" (no refit since the first yet)." if same else ".")
            + (
                " The latest fit used other settings: its column shows the edits and the new "
                "settings together."
                if new is not None
                else ""
            )
            + ("" if s.fit_is_current else " Edits made since the latest fit are not in it.")
        )
        self._show_reference()

    def _on_changed_clicked(self, index: Any) -> None:
        if not index.isValid():
            return
        view_row = index.row()
        local = self.changed_model.source_row(view_row)
        self.bus.row_selected.emit(int(self.changed_rows[local]))

    # ---- trusted reference ---------------------------------------------------------------------
    def choose_reference(self) -> None:
        path, _ = QFileDialog.getOpenFileName(
            self,
            "Trusted reference file",
            str(self.session.loaded.source.path.parent),
            "Tables (*.csv *.tsv *.txt *.parquet *.xlsx *.xls)",
        )
        if not path:
            return
        try:
            frame = door.read_reference(path)
        except ReviewerError as exc:
            self.reference_label.setText(str(exc))
            return
        cols = [str(c) for c in frame.columns]
        roles = self.session.roles
        id_guess = cols.index(roles.id) if roles.id in cols else 0
        id_col, ok = QInputDialog.getItem(self, "Reference", "Id column:", cols, id_guess, False)
        if not ok:
            return
        lab_guess = cols.index(roles.label) if roles.label in cols else min(1, len(cols) - 1)
        label_col, ok = QInputDialog.getItem(
            self, "Reference", "Trusted label column:", cols, lab_guess, False
        )
        if ok:
            self.set_reference(frame, id_col, label_col, name=Path(path).name)

    def set_reference(
        self, frame: pd.DataFrame, id_col: str, label_col: str, *, name: str = "reference"
    ) -> None:
        self.reference = (frame, id_col, label_col)
        self.reference_name = name
        self._show_reference()

    def _show_reference(self) -> None:
        s = self.session
        self.reference_scores = None
        if self.reference is None:
            return
        if s.baseline is None or s.latest is None:
            self.reference_label.setText("Reference loaded; fit first to score it.")
            return
        frame, id_col, label_col = self.reference
        try:
            out = door.score_reference(s, frame, id_col, label_col)
        except ReviewerError as exc:
            self.reference_label.setText(str(exc))
            return
        self.reference_scores = out
        if out is None:
            self.reference_label.setText("Reference loaded; fit first to score it.")
            return
        b, a = out["before"], out["after"]
        self.reference_label.setText(
            f"<b>Against {self.reference_name}</b> ({out['matched']:,} rows matched by id"
            + (
                f"; {out['unmatched_reference']:,} reference ids not in the table"
                if out["unmatched_reference"]
                else ""
            )
            + ")<br>"
            "<table cellspacing=4><tr><th></th><th>before</th><th>after</th><th>change</th></tr>"
            f"<tr><td>accuracy</td><td>{_fmt(b['accuracy'])}</td><td>{_fmt(a['accuracy'])}</td>"
            f"<td>{_fmt(a['accuracy'] - b['accuracy'], True)}</td></tr>"
            f"<tr><td>balanced accuracy</td><td>{_fmt(b['balanced_accuracy'])}</td>"
            f"<td>{_fmt(a['balanced_accuracy'])}</td>"
            f"<td>{_fmt(a['balanced_accuracy'] - b['balanced_accuracy'], True)}</td></tr>"
            "</table>"
        )


class ViewsPanel(QTabWidget):
    """The four views as tabs. Redraws on fit and label changes (the visible tab at once)."""

    def __init__(
        self,
        session: ReviewSession,
        bus: ReviewBus,
        parent: QWidget | None = None,
        *,
        projection_limit: int = door.PROJECTION_LIMIT,
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.projection = ProjectionPlot(session, bus, limit=projection_limit)
        self.histogram = SlackHistogramPlot(session, bus)
        self.c_curve = CCurvePlot(session, bus)
        self.compare = CompareView(session, bus)
        self.addTab(self.projection, "Projection")
        self.addTab(self.histogram, "Slack")
        self.addTab(self.c_curve, "C curve")
        self.addTab(self.compare, "Before and after")
        self.setTabToolTip(0, "Every row on the first two principal components of the features")
        self.setTabToolTip(1, "How many rows have each slack; drag the line to filter the list")
        self.setTabToolTip(2, "Cross-validated scores across C: pick a C to refit with")
        self.setTabToolTip(3, "The first fit against the latest one")
        self._stale: set[int] = set(range(self.count()))
        self.currentChanged.connect(self._on_tab)
        bus.fit_changed.connect(self.mark_stale)
        bus.labels_changed.connect(self.mark_stale)
        self.refresh()

    def views(self) -> list[Any]:
        """The four view widgets, in tab order (each has ``refresh()``)."""
        return [w for i in range(self.count()) if (w := self.widget(i)) is not None]

    def refresh(self) -> None:
        """Redraw every view now."""
        for view in self.views():
            view.refresh()
        self._stale.clear()

    def mark_stale(self) -> None:
        # Redrawing hidden views at a million rows costs seconds for nothing on screen.
        self._stale = set(range(self.count()))
        self._on_tab(self.currentIndex())

    def _on_tab(self, index: int) -> None:
        if index in self._stale:
            self._stale.discard(index)
            view: Any = self.widget(index)
            if view is not None:
                view.refresh()

    def shutdown(self) -> None:
        """Stop background work (the C curve); call from the window's closeEvent."""
        self.c_curve.shutdown()


def widget_png(widget: QWidget) -> bytes:
    """The widget as it would be drawn, as PNG bytes (works offscreen)."""
    pixmap = widget.grab()
    data = QByteArray()
    buffer = QBuffer(data)
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    pixmap.save(buffer, "PNG")
    buffer.close()
    return bytes(data.data())


def render_views_png(
    session: ReviewSession, panel: ViewsPanel | None = None, *, size: tuple[int, int] = (960, 680)
) -> dict[str, bytes]:
    """Caption -> PNG of each view, for ``write_summary_html``'s ``images``.

    The views are drawn in a hidden panel of ``size`` pixels, so the window is left as it is.
    Pass the window's panel to include the C curve it has computed (a sweep takes a while,
    so none is started here); without one the C curve is left out.
    """
    if QApplication.instance() is None:
        raise RuntimeError("render_views_png needs a QApplication")
    shadow = ViewsPanel(session, ReviewBus())
    shadow.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen, True)
    shadow.resize(*size)
    shadow.show()
    if panel is not None and panel.c_curve.result is not None:
        shadow.c_curve.set_result(panel.c_curve.result)
    shots = [
        ("Projection of every row on two principal components", shadow.projection),
        ("Slack histogram", shadow.histogram),
    ]
    if shadow.c_curve.series:
        shots.append(("Cross-validated C curve", shadow.c_curve))
    if session.baseline is not None and session.latest is not None:
        shots.append(("Before and after", shadow.compare))
    out: dict[str, bytes] = {}
    try:
        for caption, view in shots:
            shadow.setCurrentWidget(view)
            QApplication.processEvents()
            out[caption] = widget_png(view)
    finally:
        shadow.hide()
        shadow.deleteLater()
    return out
