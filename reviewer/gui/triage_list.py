"""The triage list: the ranked rows, their filters, the selection, and moving to the next
open row after a decision. It shows the session's arrays; the rules (which rows need a look,
which row is next) come from the door."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
from PySide6.QtCore import QEvent, QObject, Qt
from PySide6.QtGui import QKeyEvent
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMenu,
    QSizePolicy,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door, values
from reviewer.core.door import ReviewSession
from reviewer.core.values import display_name
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.dialogs import app_settings
from reviewer.gui.table_model import SOURCE_ROW_ROLE, ArrayTableModel, ColumnSpec
from reviewer.gui.widgets import ElidedLabel

ALL = "all"
FIT_KEYS = ("slack", "heldout_slack", "zone", "support", "model_label", "rank")
TEXT_KEYS = ("zone", "support", "model_label")
#: Widest a column starts (pixels): a long label or id elides instead of widening the window.
MAX_COLUMN_WIDTH = 220
#: Object columns with values longer than this show as text: one line, whole in the tooltip.
MAX_COLUMN_CHARS = 40
#: Keys of the table's own columns in the list start with this.
DATA_PREFIX = "col:"
#: Columns the chooser does not offer: without them the list cannot be read.
FIXED_COLUMNS = ("rank", "id")
CHOICE_KEY = "list/columns"

# A symbol per review state, so the state reads without its tint (and on a selected row).
STATE_SYMBOLS = {"open": "○", "confirmed": "✓", "relabelled": "✎", "excluded": "✕"}


def review_text(name: object) -> str:
    return f"{STATE_SYMBOLS.get(str(name), '')} {name}".strip()


def one_line(value: object) -> str:
    """The first line of a text value, with "…" when more follows (the view elides it too)."""
    text = str(value).strip()
    first, _, rest = text.partition("\n")
    return first + (" …" if rest.strip() else "")


def _longest(values: np.ndarray, sample: int = 2000) -> int:
    """Longest text among (a sample of) the values."""
    step = max(1, len(values) // sample)
    return max((len(v) for v in values[::step] if isinstance(v, str)), default=0)


def _stored_choice() -> dict[str, bool]:
    raw = app_settings().value(CHOICE_KEY, "")
    try:
        data = json.loads(str(raw)) if raw else {}
    except ValueError:
        return {}
    return {str(k): bool(v) for k, v in data.items()} if isinstance(data, dict) else {}


def _compact(combo: QComboBox, chars: int) -> None:
    combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    combo.setMinimumContentsLength(chars)


class TriageList(QWidget):
    """Filters over a ranked table of rows, and a deck with the class numbers and the reason
    for the next decision. Emits ``bus.row_selected`` for the current row (-1 for none)."""

    def __init__(self, bus: ReviewBus, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("triage_list")
        self.bus = bus
        self.session: ReviewSession | None = None
        self._bus_mask: np.ndarray | None = None
        self._syncing = False
        self._sized_with_fit = False
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 0)

        bar = QHBoxLayout()
        self.zone_filter = QComboBox()
        self.zone_filter.addItem("all zones", ALL)
        self.zone_filter.addItem("needs a look (not clear)", door.ATTENTION)
        for z in values.ZONES:
            self.zone_filter.addItem(display_name(z), z)
        self.class_filter = QComboBox()
        self.class_filter.addItem("all classes", ALL)
        self.state_filter = QComboBox()
        self.state_filter.addItem("all states", ALL)
        for name in values.REVIEW_NAMES:
            self.state_filter.addItem(review_text(name), name)
        for combo in (self.zone_filter, self.class_filter, self.state_filter):
            _compact(combo, 7)
        self.id_filter = QLineEdit()
        self.id_filter.setObjectName("id_filter")
        self.id_filter.setPlaceholderText("find id…")
        self.id_filter.setClearButtonEnabled(True)
        self.id_filter.setMinimumWidth(90)
        self.id_filter.installEventFilter(self)
        for w, tip in (
            (self.zone_filter, "Show one zone"),
            (self.class_filter, "Show one class (the current label)"),
            (self.state_filter, "Show one review state"),
            (self.id_filter, "Show rows whose id contains this text; Down goes to the list"),
        ):
            w.setToolTip(tip)
            bar.addWidget(w, 1)
        self.shown_label = ElidedLabel("")
        self.shown_label.setObjectName("hint")
        bar.addWidget(self.shown_label, 1)
        lay.addLayout(bar)
        self.zone_filter.currentIndexChanged.connect(self.apply_filters)
        self.class_filter.currentIndexChanged.connect(self.apply_filters)
        self.state_filter.currentIndexChanged.connect(self.apply_filters)
        self.id_filter.textChanged.connect(self.apply_filters)

        self.model = ArrayTableModel()
        self.table = QTableView()
        self.table.setObjectName("triage_table")
        self.table.setModel(self.model)
        # Fit columns to a sample of rows, not to every row of a million-row table.
        self.table.horizontalHeader().setResizeContentsPrecision(200)
        self.table.setSortingEnabled(True)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.ExtendedSelection)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setTextElideMode(Qt.TextElideMode.ElideRight)
        self.table.verticalHeader().setDefaultSectionSize(22)
        self.table.horizontalHeader().setHighlightSections(False)
        # Right-click a column header to choose the columns (the View menu has it too).
        header = self.table.horizontalHeader()
        header.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        header.customContextMenuRequested.connect(self._header_menu)
        header.setToolTip("Right-click to choose the columns")
        self._default_shown: set[str] = set()
        self.table.selectionModel().currentChanged.connect(self._on_current_changed)
        lay.addWidget(self.table, 1)

        deck = QHBoxLayout()
        self.classes_label = QLabel("")
        self.classes_label.setObjectName("classes_legend")
        self.classes_label.setTextFormat(Qt.TextFormat.RichText)
        # Many classes must not widen the window: the legend is cut, its tooltip lists all.
        self.classes_label.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        deck.addWidget(self.classes_label, 3)
        deck.addWidget(QLabel("Reason:"))
        self.reason_combo = QComboBox()
        self.reason_combo.setEditable(True)
        self.reason_combo.addItems(["", *values.REASONS])
        _compact(self.reason_combo, 10)
        self.reason_combo.setToolTip("Goes with the next decision only (choose or type)")
        edit = self.reason_combo.lineEdit()
        if edit is not None:
            edit.setPlaceholderText("for the next decision")
        deck.addWidget(self.reason_combo, 1)
        lay.addLayout(deck)
        bus.rows_filter.connect(self._on_bus_filter)
        bus.row_selected.connect(self._on_bus_row)

    # ---- keys ----------------------------------------------------------------------------
    def eventFilter(self, watched: QObject, event: QEvent) -> bool:
        if (
            watched is self.id_filter
            and event.type() == QEvent.Type.KeyPress
            and isinstance(event, QKeyEvent)
            and event.key() in (Qt.Key.Key_Down, Qt.Key.Key_Return, Qt.Key.Key_Enter)
        ):
            self.table.setFocus()
            if self.current_row() is None:
                self.select_view_row(0)
            return True
        return super().eventFilter(watched, event)

    def focus_find(self) -> None:
        self.id_filter.setFocus()
        self.id_filter.selectAll()

    # ---- content ---------------------------------------------------------------------------
    def set_session(self, session: ReviewSession) -> None:
        self.session = session
        self._bus_mask = None
        self.class_filter.blockSignals(True)
        self.class_filter.clear()
        self.class_filter.addItem("all classes", ALL)
        for c in session.classes:
            self.class_filter.addItem(c, c)
        self.class_filter.blockSignals(False)
        self._build_columns()

    def fit_column(self, key: str) -> np.ndarray:
        s = self.session
        assert s is not None
        n = s.n_rows
        if s.latest is None:
            if key in TEXT_KEYS:
                return np.full(n, None, dtype=object)
            return np.full(n, np.nan)
        col = s.latest.rows[key]
        if key in TEXT_KEYS:
            # Codes and class names are text already; missing ones show as empty cells.
            out = col.to_numpy(dtype=object, copy=True)
            out[pd.isna(out)] = None
            return out
        if key == "rank":
            return col.to_numpy(dtype=np.int64)
        return col.to_numpy(dtype=float)

    def labels(self) -> np.ndarray:
        assert self.session is not None
        return np.array(self.session.labels, dtype=object, copy=True)

    def review_names(self) -> np.ndarray:
        assert self.session is not None
        names = np.array(values.REVIEW_NAMES, dtype=object)
        return names[self.session.review.astype(np.int64)]

    def _build_columns(self) -> None:
        s = self.session
        assert s is not None
        score = s.latest.settings.score if s.latest is not None else s.settings.score
        specs = [
            ColumnSpec(
                "rank",
                "Rank",
                self.fit_column("rank") if s.latest else np.full(s.n_rows, np.nan),
                decimals=0,
                tooltip=f"1 = the row most likely mislabelled, by {display_name(score)}",
            ),
            ColumnSpec("id", s.roles.id or "Row", np.asarray(s.ids, dtype=object)),
            ColumnSpec("label", "Label", self.labels()),
            # The review state sits beside the label, so it shows on a laptop screen too.
            ColumnSpec("review", "Review", self.review_names(), formatter=review_text),
            ColumnSpec("model_label", "Model's label", self.fit_column("model_label")),
            ColumnSpec(
                "heldout_slack",
                "Held-out slack",
                self.fit_column("heldout_slack"),
                decimals=3,
                tooltip="Slack from a model that did not see this row",
            ),
            ColumnSpec(
                "slack",
                "Slack",
                self.fit_column("slack"),
                decimals=3,
                tooltip="How far past its own margin the row sits (0 = clear)",
            ),
            ColumnSpec("zone", "Zone", self.fit_column("zone"), formatter=display_name),
            ColumnSpec("support", "Support", self.fit_column("support"), formatter=display_name),
        ]
        specs.extend(self._data_columns(s))
        self.model.set_columns(specs)
        self.apply_column_choice()
        self.model.sort_by("rank")
        self.table.horizontalHeader().setSortIndicator(0, Qt.SortOrder.AscendingOrder)
        self.style_rows()
        self.apply_filters()
        self.size_columns()
        self._sized_with_fit = s.latest is not None
        self.show_classes()

    def _data_columns(self, s: ReviewSession) -> list[ColumnSpec]:
        """Every column of the table but the id and label: the features first, then the
        rest in table order. Text shows cut to one line, the whole value in the tooltip."""
        frame = s.frame
        features = [str(c) for c in s.roles.features]
        text_cols = {str(c) for c in getattr(s.roles, "text", []) or []}
        skip = {str(s.roles.label), str(s.roles.id)}
        others = [str(c) for c in frame.columns if str(c) not in skip and str(c) not in features]
        self._default_shown = {f"{DATA_PREFIX}{c}" for c in features}
        specs = []
        for col in [*features, *others]:
            vals = frame[col].to_numpy()
            if vals.dtype.kind not in "fiub":
                vals = vals.astype(object)
            is_text = col in text_cols or (
                vals.dtype.kind == "O" and _longest(vals) > MAX_COLUMN_CHARS
            )
            specs.append(
                ColumnSpec(
                    f"{DATA_PREFIX}{col}",
                    col,
                    vals,
                    decimals=2,
                    formatter=one_line if is_text else None,
                    full_tooltip=is_text,
                    tooltip="" if col in features else "not used by the model",
                )
            )
        return specs

    # ---- column choice ---------------------------------------------------------------------
    def chooser_menu(self) -> QMenu:
        """A menu with a check box per column of the list (the rank and the id stay)."""
        menu = QMenu("Columns", self)
        menu.setObjectName("columns_menu")
        for i in range(self.model.columnCount()):
            key = self.model.column_key(i)
            if key in FIXED_COLUMNS:
                continue
            spec = self.model.column_spec(key)
            act = menu.addAction(spec.header)
            act.setCheckable(True)
            act.setChecked(not self.table.isColumnHidden(i))
            if spec.tooltip:
                act.setToolTip(spec.tooltip)
            act.toggled.connect(lambda on, k=key: self.show_column(k, on))
        menu.setToolTipsVisible(True)
        return menu

    def _header_menu(self, pos) -> None:
        self.chooser_menu().exec(self.table.horizontalHeader().mapToGlobal(pos))

    def shown_columns(self) -> list[str]:
        """Keys of the columns the list shows, left to right."""
        return [
            self.model.column_key(i)
            for i in range(self.model.columnCount())
            if not self.table.isColumnHidden(i)
        ]

    def show_column(self, key: str, on: bool = True) -> None:
        """Show or hide one column, and remember the choice for the next time."""
        i = self.model.column_index(key)
        self.table.setColumnHidden(i, not on)
        if on and self.table.columnWidth(i) == 0:
            self.table.resizeColumnToContents(i)
        if on and self.table.columnWidth(i) > MAX_COLUMN_WIDTH:
            self.table.setColumnWidth(i, MAX_COLUMN_WIDTH)
        choice = _stored_choice()
        choice[key] = bool(on)
        store = app_settings()
        store.setValue(CHOICE_KEY, json.dumps(choice))
        store.sync()

    def apply_column_choice(self) -> None:
        """Features and the fit columns show by default, other table columns not; a choice
        made before (any table with a column of that name) wins."""
        choice = _stored_choice()
        for i in range(self.model.columnCount()):
            key = self.model.column_key(i)
            default = not key.startswith(DATA_PREFIX) or key in self._default_shown
            self.table.setColumnHidden(i, not choice.get(key, default))

    def size_columns(self) -> None:
        self.table.resizeColumnsToContents()
        header = self.table.horizontalHeader()
        for i in range(header.count()):
            if header.sectionSize(i) > MAX_COLUMN_WIDTH:
                header.resizeSection(i, MAX_COLUMN_WIDTH)

    def style_rows(self) -> None:
        s = self.session
        if s is None:
            return
        # One code per row: a review decision shows over the zone colour.
        codes = palette.codes_for(self.fit_column("zone"), palette.ZONES)
        review = s.review
        for offset, code in ((3, values.CONFIRMED), (4, values.RELABELLED), (5, values.EXCLUDED)):
            codes[review == code] = offset
        styles = palette.zone_row_styles()
        states = palette.state_row_styles()
        styles.update({3: states[1], 4: states[2], 5: states[3]})
        self.model.set_row_style(codes, styles)

    def show_classes(self) -> None:
        s = self.session
        if s is None:
            self.classes_label.setText("")
            return
        parts, plain = [], []
        for i, c in enumerate(s.classes[:9]):
            color = palette.class_color(i).name()
            parts.append(f"<b>{i + 1}</b>&nbsp;<span style='color:{color}'>■</span>&nbsp;{c}")
            plain.append(f"{i + 1} {c}")
        self.classes_label.setText("Classes:&nbsp; " + " &nbsp;·&nbsp; ".join(parts))
        self.classes_label.setToolTip("Keys for relabelling: " + ", ".join(plain))

    def refresh_labels(self) -> None:
        s = self.session
        if s is None:
            return
        self.model.update_values("label", self.labels())
        self.model.update_values("review", self.review_names())
        self.style_rows()
        if self.model.sort_key in ("label", "review"):
            self.model.sort_by(self.model.sort_key, self.model.sort_descending)
        self.apply_filters()
        known = {self.class_filter.itemData(i) for i in range(self.class_filter.count())}
        for c in s.classes:
            if c not in known:
                self.class_filter.addItem(c, c)
        self.show_classes()

    def refresh_fit(self) -> None:
        s = self.session
        if s is None:
            return
        for key in FIT_KEYS:
            self.model.update_values(key, self.fit_column(key))
        if self.model.sort_key:
            # Re-sort on the new values; a layout change keeps the selection on its rows.
            self.model.sort_by(self.model.sort_key, self.model.sort_descending)
        self.style_rows()
        self.apply_filters()
        self.show_classes()
        if not self._sized_with_fit:
            self.size_columns()
            self._sized_with_fit = True
        if not self.table.selectionModel().hasSelection():
            self.select_view_row(0)

    # ---- filtering -------------------------------------------------------------------------
    def apply_filters(self) -> None:
        s = self.session
        if s is None:
            return
        zone = self.zone_filter.currentData()
        cls = self.class_filter.currentData()
        state = self.state_filter.currentData()
        mask = door.row_mask(
            s.n_rows,
            zones=self.fit_column("zone") if zone != ALL else None,
            zone=None if zone == ALL else zone,
            labels=self.labels(),
            label=None if cls in (ALL, None) else cls,
            review=s.review,
            state=None if state == ALL else state,
            ids=s.ids,
            id_text=self.id_filter.text(),
            extra=self._bus_mask,
        )
        had_current = self.current_row() is not None
        self.model.set_filter(mask)
        self.shown_label.setText(f"{self.model.rowCount():,} of {s.n_rows:,} rows shown")
        # The row panel follows the list: a row the filters hide is not shown as current.
        if had_current and self.current_row() is None:
            if self.model.rowCount():
                self.select_view_row(0)
            else:
                self.bus.row_selected.emit(-1)

    def _on_bus_filter(self, mask: object) -> None:
        self._bus_mask = None if mask is None else np.asarray(mask, dtype=bool)
        self.apply_filters()

    # ---- selection -------------------------------------------------------------------------
    def selected_rows(self) -> list[int]:
        """Source rows selected in the list (the current row when nothing is selected)."""
        sel = self.table.selectionModel()
        rows = sorted({self.model.data(i, SOURCE_ROW_ROLE) for i in sel.selectedRows()})
        if not rows and self.table.currentIndex().isValid():
            rows = [self.model.data(self.table.currentIndex(), SOURCE_ROW_ROLE)]
        return rows

    def current_row(self) -> int | None:
        idx = self.table.currentIndex()
        return None if not idx.isValid() else int(self.model.data(idx, SOURCE_ROW_ROLE))

    def select_view_row(self, view_row: int) -> None:
        if not 0 <= view_row < self.model.rowCount():
            return
        idx = self.model.index(view_row, 0)
        sm = self.table.selectionModel()
        sm.setCurrentIndex(idx, sm.SelectionFlag.ClearAndSelect | sm.SelectionFlag.Rows)
        self.table.scrollTo(idx)

    def select_row(self, row: int) -> None:
        """Make source ``row`` current (if the filters show it)."""
        if not 0 <= row < self.model.source_row_count:
            return
        v = self.model.view_row(row)
        if v is not None:
            self.select_view_row(v)

    def _on_current_changed(self, current, _previous) -> None:
        if current.isValid() and not self._syncing:
            self._syncing = True
            try:
                self.bus.row_selected.emit(int(self.model.data(current, SOURCE_ROW_ROLE)))
            finally:
                self._syncing = False

    def _on_bus_row(self, row: int) -> None:
        if self._syncing or self.session is None:
            return
        self._syncing = True
        try:
            self.select_row(int(row))
        finally:
            self._syncing = False

    def advance(self, rows: list[int]) -> None:
        """Move the cursor to the next open row after the decided ones, in view order."""
        s = self.session
        if s is None or self.model.rowCount() == 0:
            return
        views = [v for r in rows if (v := self.model.view_row(r)) is not None]
        start = (max(views) + 1) if views else 0
        target = door.next_open_position(s.review[self.model.view_order()], start)
        if target is not None:
            self.select_view_row(target)

    def take_reason(self) -> str:
        reason = self.reason_combo.currentText().strip()
        self.reason_combo.setCurrentIndex(0)
        self.reason_combo.setEditText("")
        return reason
