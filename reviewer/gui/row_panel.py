"""The current row in context: its fit values, its text with the telling terms marked and the
columns the model leaves out, its features beside its class's typical values, its nearest
labelled neighbours and its own edit history. Everything comes from the session."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QGridLayout,
    QHeaderView,
    QLabel,
    QPlainTextEdit,
    QSplitter,
    QTableView,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from reviewer.core.door import ReviewSession
from reviewer.core.values import REVIEW_NAMES, display_name
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.table_model import SOURCE_ROW_ROLE, ArrayTableModel, ColumnSpec
from reviewer.gui.text_view import ReadingPart
from reviewer.gui.widgets import ElidedLabel

_FIT_FIELDS = (
    ("margin", "Margin"),
    ("slack", "Slack"),
    ("heldout_margin", "Held-out margin"),
    ("heldout_slack", "Held-out slack"),
    ("alpha", "Alpha"),
    ("zone", "Zone"),
    ("support", "Support"),
    ("model_label", "Model's label"),
)


def _text(value: object) -> str:
    if value is None:
        return "–"
    if isinstance(value, (float, np.floating)):
        return "–" if math.isnan(value) else f"{value:.3f}"
    return display_name(str(value))


def _full_text(value: object) -> str:
    """A cell as text, in full (no rounding); missing values as a dash."""
    if value is None or (pd.api.types.is_scalar(value) and pd.isna(value)):
        return "–"
    return str(value)


def _text_columns(s: ReviewSession) -> list[str]:
    """The table's text feature columns (none when the roles have no text kind)."""
    return [str(c) for c in getattr(s.roles, "text", []) or []]


def _titled(title: str, body: QWidget) -> QWidget:
    box = QWidget()
    lay = QVBoxLayout(box)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.setSpacing(2)
    lay.addWidget(ElidedLabel(title))
    lay.addWidget(body, 1)
    return box


def _fit_columns(view: QTableView) -> None:
    """Every column as wide as its header and values but the first shown one, which takes
    what is left (and elides its text when that is too little)."""
    header = view.horizontalHeader()
    shown = [i for i in range(header.count()) if not view.isColumnHidden(i)]
    first = shown[0] if shown else 0
    for i in range(header.count()):
        stretch = i == first
        mode = (
            QHeaderView.ResizeMode.Stretch if stretch else QHeaderView.ResizeMode.ResizeToContents
        )
        header.setSectionResizeMode(i, mode)


def _small_table(name: str) -> QTableView:
    view = QTableView()
    view.setObjectName(name)
    view.verticalHeader().hide()
    view.verticalHeader().setDefaultSectionSize(22)
    view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
    view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    return view


class RowPanel(QWidget):
    """Follows ``bus.row_selected``; clicking a neighbour emits it."""

    def __init__(self, bus: ReviewBus, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("row_panel")
        self.bus = bus
        self.session: ReviewSession | None = None
        self.row: int | None = None
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 4, 6, 4)
        self.title = ElidedLabel("No row selected")
        self.title.setObjectName("row_title")
        outer.addWidget(self.title)
        # Four parts side by side in a splitter: each can be narrowed (or collapsed), so the
        # panel never makes the window wider than the screen.
        self.split = QSplitter(Qt.Orientation.Horizontal)
        self.split.setObjectName("row_split")
        self.split.setChildrenCollapsible(True)
        outer.addWidget(self.split, 1)

        facts = QWidget()
        grid = QGridLayout(facts)
        grid.setContentsMargins(0, 0, 6, 0)
        grid.setHorizontalSpacing(8)
        grid.setVerticalSpacing(2)
        self.values: dict[str, QLabel] = {}
        fields = (("label", "Label"), ("review", "Review state"), *_FIT_FIELDS)
        half = len(fields)  # one column of pairs: narrow, and the dock is tall enough
        for i, (key, text) in enumerate(fields):
            lab = ElidedLabel("–")
            lab.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            self.values[key] = lab
            name = QLabel(text)
            name.setObjectName("hint")
            r, c = i % half, 2 * (i // half)
            grid.addWidget(name, r, c)
            grid.addWidget(lab, r, c + 1)
        grid.setColumnStretch(1, 1)
        grid.setRowStretch(half, 1)
        self.split.addWidget(facts)

        # The row's text in full (terms marked) and every column the model leaves out.
        self.reading = ReadingPart()
        self.split.addWidget(self.reading)

        self.features_model = ArrayTableModel()
        self.features = _small_table("features_table")
        self.features.setModel(self.features_model)
        self.split.addWidget(
            _titled("Features beside the class's typical values (⚑ tinted: unusual)", self.features)
        )

        self.neighbours_model = ArrayTableModel()
        self.neighbours = _small_table("neighbours_table")
        self.neighbours.setModel(self.neighbours_model)
        self.neighbours.clicked.connect(self._neighbour_clicked)
        self.history = QPlainTextEdit()
        self.history.setObjectName("history")
        self.history.setReadOnly(True)
        self.history.setLineWrapMode(QPlainTextEdit.LineWrapMode.WidgetWidth)
        # Neighbours and history share a tabbed part, so each gets the width it needs.
        self.context_tabs = QTabWidget()
        self.context_tabs.setObjectName("row_context_tabs")
        self.context_tabs.addTab(self.neighbours, "Nearest labelled rows")
        self.context_tabs.addTab(self.history, "History")
        self.context_tabs.setTabToolTip(0, "Tinted: another label. Click one to go to it.")
        self.context_tabs.setTabToolTip(1, "Every decision and note on this row, newest last")
        self.split.addWidget(self.context_tabs)
        for i, stretch in enumerate((2, 4, 4, 3)):
            self.split.setStretchFactor(i, stretch)
        self._size_parts(has_text=False)

        bus.row_selected.connect(self.show_row)

    def set_session(self, session: ReviewSession | None) -> None:
        self.session = session
        self.row = None
        self._size_parts(has_text=bool(session is not None and _text_columns(session)))
        self.refresh()

    def _size_parts(self, *, has_text: bool) -> None:
        # A table with text gives its reading part the most room; otherwise it holds a few
        # short lines (the columns the model leaves out).
        self.split.setSizes([220, 460, 330, 290] if has_text else [240, 200, 390, 370])

    def show_row(self, row: int) -> None:
        self.row = int(row)
        self.refresh()

    def refresh(self) -> None:
        s, row = self.session, self.row
        if s is None or row is None or not 0 <= row < s.n_rows:
            self.title.setText("No row selected")
            for lab in self.values.values():
                lab.setText("–")
            self.features_model.set_columns([])
            self.neighbours_model.set_columns([])
            self.history.setPlainText("")
            self.reading.clear()
            return
        # Without an id column the id is the row number: say it once.
        self.title.setText(
            f"Row {row}   ·   {s.roles.id} {s.ids[row]}" if s.roles.id else f"Row {row}"
        )

        self.values["label"].setText(_text(s.labels[row]))
        self.values["review"].setText(REVIEW_NAMES[int(s.review[row])])
        fit = s.latest.rows.iloc[row] if s.latest is not None else None
        for key, _ in _FIT_FIELDS:
            self.values[key].setText(_text(fit[key]) if fit is not None else "–")
        self._show_reading(s, row)
        self._show_features(s, row)
        self._show_neighbours(s, row)
        lines = []
        for e in s.row_history(row):
            what = e.action
            if e.action == "relabel":
                i = e.rows.index(row) if row in e.rows else 0
                what = f"relabel {e.before[i]} → {e.after[i]}" if e.after else what
            extra = "; ".join(x for x in (e.reason, e.note) if x)
            lines.append(
                f"#{e.seq} {e.time[:19].replace('T', ' ')}  {what}"
                + (f"  ({extra})" if extra else "")
            )
        self.history.setPlainText("\n".join(lines) or "No decisions yet.")
        self.context_tabs.setTabText(1, f"History ({len(lines)})" if lines else "History")

    def _show_reading(self, s: ReviewSession, row: int) -> None:
        frame = s.frame
        text_cols = _text_columns(s)
        fields = [(c, _full_text(frame[c].iloc[row])) for c in text_cols]
        terms = s.term_contributions(row, k=12) if text_cols else pd.DataFrame()
        others = [
            (str(c), _full_text(frame[c].iloc[row]), str(s.roles.ignored[c]))
            for c in frame.columns
            if c in s.roles.ignored
        ]
        self.reading.show_row(fields, terms, others)

    def _show_features(self, s: ReviewSession, row: int) -> None:
        prof = s.feature_profile(row)
        unusual = prof["unusual"].to_numpy(dtype=bool)
        # Unusual features carry a flag as well as the tint, so they read without colour.
        names = np.array(
            [f"⚑ {n}" if u else str(n) for n, u in zip(prof["feature"], unusual, strict=True)],
            dtype=object,
        )
        self.features_model.set_columns(
            [
                ColumnSpec("feature", "Feature", names),
                ColumnSpec("value", "This row", prof["value"].astype(object).to_numpy()),
                ColumnSpec(
                    "typical", "Class typical", prof["class_typical"].astype(object).to_numpy()
                ),
                ColumnSpec("distance", "Distance", prof["distance"].to_numpy(dtype=float), 2),
            ]
        )
        self.features_model.set_row_style(
            unusual.astype(np.int8),
            {1: (palette.tint(palette.ORANGE, 0.3), QColor(palette.TEXT))},
        )
        _fit_columns(self.features)

    def _show_neighbours(self, s: ReviewSession, row: int) -> None:
        nb = s.neighbours(row)
        self.neighbours_model.set_columns(
            [
                # The table position, for the click; hidden (the id names the row).
                ColumnSpec("row", "Row", nb["row"].to_numpy(dtype=np.int64)),
                ColumnSpec("row_id", s.roles.id or "Row", nb["row_id"].astype(object).to_numpy()),
                ColumnSpec("label", "Label", nb["label"].astype(object).to_numpy()),
                ColumnSpec("slack", "Slack", nb["slack"].to_numpy(dtype=float), 2),
                ColumnSpec("distance", "Distance", nb["distance"].to_numpy(dtype=float), 2),
            ]
        )
        mine = s.labels[row]
        other = np.array([lab != mine for lab in nb["label"]], dtype=np.int8)
        self.neighbours_model.set_row_style(
            other, {1: (palette.tint(palette.YELLOW, 0.35), QColor(palette.TEXT))}
        )
        self.neighbours.setColumnHidden(0, True)
        _fit_columns(self.neighbours)

    def _neighbour_clicked(self, index) -> None:
        m = self.neighbours_model
        src = m.data(index, SOURCE_ROW_ROLE)
        row = int(m.column_spec("row").values[src])
        self.bus.row_selected.emit(row)
