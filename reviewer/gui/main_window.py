"""The review window: a ranked triage list, the current row in context, decisions by key.

A thin layer over ReviewSession: every decision is one session call, fits run through
TaskRunner off the GUI thread, and the list is refreshed from the session's arrays.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np
from PySide6.QtCore import QEventLoop, QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDockWidget,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QInputDialog,
    QLabel,
    QLineEdit,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QSplitter,
    QTableView,
    QTextBrowser,
    QToolBar,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door, values
from reviewer.core.door import ReviewSession
from reviewer.core.errors import ReviewerError, SourceChangedError
from reviewer.gui import palette, resources
from reviewer.gui.bus import ReviewBus
from reviewer.gui.help_text import CAUTION, help_html
from reviewer.gui.roles_dialog import RolesDialog
from reviewer.gui.row_panel import RowPanel
from reviewer.gui.settings_panel import SettingsPanel
from reviewer.gui.table_model import SOURCE_ROW_ROLE, ArrayTableModel, ColumnSpec
from reviewer.gui.workers import TaskRunner

ALL = "all"
RECENT_KEY = "recent_files"
MAX_RECENT = 8
FIT_KEYS = ("slack", "heldout_slack", "zone", "support", "model_label", "rank")


def app_settings() -> QSettings:
    """Per-user settings (recent files) in an INI file, so tests can point it elsewhere."""
    return QSettings(
        QSettings.Format.IniFormat, QSettings.Scope.UserScope, "margin-reviewer", "window"
    )


class MainWindow(QMainWindow):
    """One window, one session at a time."""

    def __init__(self, session: ReviewSession | None = None, *, auto_fit: bool = True) -> None:
        super().__init__()
        self.setObjectName("main_window")
        self.setWindowTitle("Margin Reviewer")
        self.resize(1440, 900)
        self.bus = ReviewBus(self)
        self.session: ReviewSession | None = None
        self.auto_fit = auto_fit
        self.runner = TaskRunner(self)
        self.runner.progress.connect(self._fit_progress)
        self.runner.finished.connect(self._fit_finished)
        self.runner.failed.connect(self._fit_failed)
        self.runner.cancelled.connect(self._fit_cancelled)
        self._job: Any = None
        self._bus_mask: np.ndarray | None = None
        self._syncing = False
        self.last_message = ""
        self._sized_with_fit = False

        self._build_list()
        self.row_panel = RowPanel(self.bus)
        split = QSplitter(Qt.Orientation.Vertical)
        split.setObjectName("main_splitter")
        split.addWidget(self.list_area)
        split.addWidget(self.row_panel)
        split.setStretchFactor(0, 3)
        split.setStretchFactor(1, 2)
        self.setCentralWidget(split)

        self.settings_panel = SettingsPanel()
        self.settings_panel.refit_clicked.connect(self.refit)
        self.settings_dock = QDockWidget("Fit settings", self)
        self.settings_dock.setObjectName("settings_dock")
        left = QWidget()
        left_lay = QVBoxLayout(left)
        left_lay.setContentsMargins(0, 0, 0, 0)
        left_lay.addWidget(self.settings_panel, 1)
        self.caution_label = QLabel(CAUTION)
        self.caution_label.setObjectName("caution")
        self.caution_label.setWordWrap(True)
        self.caution_label.setStyleSheet(
            "QLabel#caution { background: #FFF7E0; border: 1px solid #EBD9A6;"
            " border-radius: 5px; padding: 8px; margin: 6px; color: #4A4F57; }"
        )
        left_lay.addWidget(self.caution_label)
        self.settings_dock.setWidget(left)
        self.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, self.settings_dock)

        self.views_slot = QDockWidget("Plots", self)
        self.views_slot.setObjectName("views_slot")
        placeholder = QLabel("Plots appear here.")
        placeholder.setAlignment(Qt.AlignmentFlag.AlignCenter)
        placeholder.setObjectName("hint")
        self.views_slot.setWidget(placeholder)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, self.views_slot)
        self.resizeDocks(
            [self.settings_dock, self.views_slot], [250, 240], Qt.Orientation.Horizontal
        )

        self._build_status()
        self._build_actions()
        self.bus.rows_filter.connect(self._on_bus_filter)
        self.bus.row_selected.connect(self._on_bus_row)
        self.bus.refit_requested.connect(self._on_refit_requested)
        self._update_enabled()
        if session is not None:
            self.set_session(session)

    # ---- building --------------------------------------------------------------------------
    def _build_list(self) -> None:
        self.list_area = QWidget()
        lay = QVBoxLayout(self.list_area)
        lay.setContentsMargins(6, 6, 6, 0)
        bar = QHBoxLayout()
        self.zone_filter = QComboBox()
        self.zone_filter.addItem("all zones", ALL)
        self.zone_filter.addItem("needs a look (not clear)", door.ATTENTION)
        for z in palette.ZONES:
            self.zone_filter.addItem(z.replace("_", " "), z)
        self.class_filter = QComboBox()
        self.class_filter.addItem("all classes", ALL)
        self.state_filter = QComboBox()
        self.state_filter.addItem("all states", ALL)
        for name in values.REVIEW_NAMES:
            self.state_filter.addItem(name, name)
        self.id_filter = QLineEdit()
        self.id_filter.setPlaceholderText("find id…")
        self.id_filter.setClearButtonEnabled(True)
        for w, tip in (
            (self.zone_filter, "Show one zone"),
            (self.class_filter, "Show one given class"),
            (self.state_filter, "Show one review state"),
            (self.id_filter, "Show rows whose id contains this text"),
        ):
            w.setToolTip(tip)
            bar.addWidget(w)
        self.shown_label = QLabel("")
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
        self.table.verticalHeader().setDefaultSectionSize(22)
        self.table.horizontalHeader().setHighlightSections(False)
        self.table.selectionModel().currentChanged.connect(self._on_current_changed)
        lay.addWidget(self.table, 1)

        deck = QHBoxLayout()
        self.classes_label = QLabel("")
        self.classes_label.setObjectName("classes_legend")
        self.classes_label.setTextFormat(Qt.TextFormat.RichText)
        deck.addWidget(self.classes_label, 1)
        deck.addWidget(QLabel("Reason for the next decision:"))
        self.reason_combo = QComboBox()
        self.reason_combo.setEditable(True)
        self.reason_combo.addItems(["", *values.REASONS])
        self.reason_combo.setMinimumWidth(260)
        self.reason_combo.lineEdit().setPlaceholderText("none (choose or type)")
        deck.addWidget(self.reason_combo)
        lay.addLayout(deck)

    def _build_status(self) -> None:
        sb = self.statusBar()
        self.status_label = QLabel("")
        self.status_label.setObjectName("status_text")
        # Permanent, so passing messages (shown on the left) never hide the counts.
        sb.addPermanentWidget(self.status_label)
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setMaximumWidth(180)
        self.progress.setTextVisible(False)
        self.progress.hide()
        self.progress_text = QLabel("")
        self.progress_text.hide()
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setObjectName("cancel_fit")
        self.cancel_button.clicked.connect(self.cancel_fit)
        self.cancel_button.hide()
        sb.addPermanentWidget(self.progress_text)
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_button)

    def _action(
        self, text: str, slot, keys: Any = None, icon: str | None = None, tip: str = ""
    ) -> QAction:
        act = QAction(text, self)
        if icon:
            act.setIcon(resources.icon(icon))
        if keys is not None:
            seqs = keys if isinstance(keys, list) else [keys]
            act.setShortcuts([QKeySequence(k) for k in seqs])
            act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        if tip:
            act.setToolTip(tip)
        act.triggered.connect(lambda checked=False: slot())
        self.addAction(act)
        return act

    def _build_actions(self) -> None:
        a = self._action
        self.act_open = a("&Open…", self.choose_file, QKeySequence.StandardKey.Open, "open")
        self.act_export = a("&Export…", self.export_dialog, "Ctrl+E", "export")
        self.act_quit = a("&Quit", self.close, QKeySequence.StandardKey.Quit)
        self.act_confirm = a(
            "&Confirm", self.confirm, "C", "confirm", "Confirm: the label is right (C)"
        )
        self.act_take_model = a(
            "Take &model's label",
            self.take_model_label,
            "M",
            None,
            "Relabel to the model's label (M)",
        )
        self.act_relabel = a(
            "&Relabel…", self.relabel_pick, "R", "relabel", "Relabel to a class or a new name (R)"
        )
        self.act_exclude = a("E&xclude", self.exclude, "X", "exclude", "Exclude (X)")
        self.act_restore = a("Re&store", self.restore, "Shift+X", "restore", "Restore (Shift+X)")
        self.act_note = a("Add &note…", self.add_note, "N", None, "Add a note (N)")
        self.act_number = [
            a(f"Relabel to class {i}", lambda i=i: self.relabel_number(i), str(i))
            for i in range(1, 10)
        ]
        self.act_undo = a("&Undo", self.undo, QKeySequence.StandardKey.Undo, "undo")
        self.act_redo = a("&Redo", self.redo, None, "redo")
        # QKeySequence(StandardKey) may expand to several sequences: keep them all.
        self.act_undo.setShortcuts(QKeySequence.keyBindings(QKeySequence.StandardKey.Undo))
        redo_keys = list(QKeySequence.keyBindings(QKeySequence.StandardKey.Redo))
        for extra in ("Ctrl+Y", "Ctrl+Shift+Z"):
            if QKeySequence(extra) not in redo_keys:
                redo_keys.append(QKeySequence(extra))
        self.act_redo.setShortcuts(redo_keys)
        self.act_refit = a("Re&fit", self.refit, ["F5", "Ctrl+R"], "refit", "Refit (F5)")
        self.act_cancel = a("Cancel fit", self.cancel_fit, "Esc")
        self.act_find = a("Find id", self._focus_find, "Ctrl+F")
        self.act_help = a(
            "&Keys and caution", self.show_help, QKeySequence.StandardKey.HelpContents
        )
        self.act_help.setShortcuts([QKeySequence("F1")])

        mb = self.menuBar()
        m = mb.addMenu("&File")
        m.addAction(self.act_open)
        self.recent_menu = m.addMenu("Open &recent")
        self.recent_menu.aboutToShow.connect(self._fill_recent)
        m.addAction(self.act_export)
        m.addSeparator()
        m.addAction(self.act_quit)
        m = mb.addMenu("&Edit")
        m.addActions([self.act_undo, self.act_redo])
        m = mb.addMenu("&Decide")
        m.addActions(
            [
                self.act_confirm,
                self.act_take_model,
                self.act_relabel,
                self.act_exclude,
                self.act_restore,
                self.act_note,
            ]
        )
        sub = m.addMenu("Relabel to class")
        sub.addActions(self.act_number)
        m = mb.addMenu("F&it")
        m.addActions([self.act_refit, self.act_cancel])
        m = mb.addMenu("&View")
        m.addAction(self.settings_dock.toggleViewAction())
        m.addAction(self.views_slot.toggleViewAction())
        m.addAction(self.act_find)
        m = mb.addMenu("&Help")
        m.addAction(self.act_help)

        tb = self.addToolBar("Main")
        tb.setObjectName("main_toolbar")
        tb.setMovable(False)
        tb.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        tb.addActions([self.act_open, self.act_export])
        tb.addSeparator()
        tb.addActions([self.act_confirm, self.act_relabel, self.act_exclude, self.act_restore])
        tb.addSeparator()
        tb.addActions([self.act_undo, self.act_redo])
        tb.addSeparator()
        tb.addAction(self.act_refit)

    # ---- session ---------------------------------------------------------------------------
    def set_session(self, session: ReviewSession) -> None:
        """Show ``session`` (closing any previous one); starts a first fit if none is saved."""
        if self.session is not None:
            self.runner.shutdown()
            self.session.close()
        self.session = session
        session.subscribe(self._on_session_event)
        self.setWindowTitle(f"Margin Reviewer – {session.loaded.source.path.name}")
        self.settings_panel.set_settings(session.settings)
        self.settings_panel.show_used(session.latest.settings if session.latest else None)
        self.class_filter.blockSignals(True)
        self.class_filter.clear()
        self.class_filter.addItem("all classes", ALL)
        for c in session.classes:
            self.class_filter.addItem(c, c)
        self.class_filter.blockSignals(False)
        self._build_columns()
        self.row_panel.set_session(session)
        remember_recent(session.loaded.source.path)
        for w in session.warnings:
            self.statusBar().showMessage(w, 10000)
        self._update_enabled()
        self._update_status()
        self.bus.fit_changed.emit()
        self.bus.labels_changed.emit()
        # Built after the announcements above: a new panel draws itself once, and at a
        # million rows each extra projection redraw costs about a second.
        self._install_plot_views(session)
        if session.latest is None and self.auto_fit:
            QTimer.singleShot(0, self.refit)
        else:
            self._select_view_row(0)

    def _fit_column(self, key: str) -> np.ndarray:
        s = self.session
        assert s is not None
        n = s.n_rows
        if s.latest is None:
            if key in ("zone", "support", "model_label"):
                return np.full(n, None, dtype=object)
            return np.full(n, np.nan)
        col = s.latest.rows[key]
        if key in ("zone", "support", "model_label"):
            return np.array([None if v is None else str(v) for v in col], dtype=object)
        if key == "rank":
            return col.to_numpy(dtype=np.int64)
        return col.to_numpy(dtype=float)

    def _build_columns(self) -> None:
        s = self.session
        assert s is not None
        word = lambda v: str(v).replace("_", " ")  # noqa: E731
        specs = [
            ColumnSpec(
                "rank",
                "Rank",
                self._fit_column("rank") if s.latest else np.full(s.n_rows, np.nan),
                decimals=0,
                tooltip="1 = the row most likely mislabelled",
            ),
            ColumnSpec("id", s.roles.id or "Row", np.asarray(s.ids, dtype=object)),
            ColumnSpec("label", "Label", self._labels()),
            ColumnSpec("model_label", "Model's label", self._fit_column("model_label")),
            ColumnSpec(
                "slack",
                "Slack",
                self._fit_column("slack"),
                decimals=3,
                tooltip="How far past its own margin the row sits (0 = clear)",
            ),
            ColumnSpec(
                "heldout_slack",
                "Held-out slack",
                self._fit_column("heldout_slack"),
                decimals=3,
                tooltip="Slack from a model that did not see this row",
            ),
            ColumnSpec("zone", "Zone", self._fit_column("zone"), formatter=word),
            ColumnSpec("support", "Support", self._fit_column("support"), formatter=word),
            ColumnSpec("review", "Review", self._review_names()),
        ]
        frame = s.frame
        for i, col in enumerate(s.roles.features):
            values = frame[col].to_numpy()
            if values.dtype.kind not in "fiub":
                values = values.astype(object)
            specs.append(ColumnSpec(f"f{i}:{col}", str(col), values, decimals=2))
        self.model.set_columns(specs)
        self.model.sort_by("rank")
        self.table.horizontalHeader().setSortIndicator(0, Qt.SortOrder.AscendingOrder)
        self._style_rows()
        self.apply_filters()
        self.table.resizeColumnsToContents()
        self._sized_with_fit = s.latest is not None
        self._show_classes()

    def _labels(self) -> np.ndarray:
        assert self.session is not None
        return np.array([None if v is None else str(v) for v in self.session.labels], dtype=object)

    def _review_names(self) -> np.ndarray:
        assert self.session is not None
        names = np.array(values.REVIEW_NAMES, dtype=object)
        return names[self.session.review.astype(np.int64)]

    def _style_rows(self) -> None:
        s = self.session
        if s is None:
            return
        # One code per row: a review decision shows over the zone colour.
        codes = palette.codes_for(self._fit_column("zone"), palette.ZONES)
        review = s.review
        for offset, code in ((3, values.CONFIRMED), (4, values.RELABELLED), (5, values.EXCLUDED)):
            codes[review == code] = offset
        styles = palette.zone_row_styles()
        states = palette.state_row_styles()
        styles.update({3: states[1], 4: states[2], 5: states[3]})
        self.model.set_row_style(codes, styles)

    def _show_classes(self) -> None:
        s = self.session
        if s is None:
            self.classes_label.setText("")
            return
        parts = []
        for i, c in enumerate(s.classes[:9]):
            color = palette.class_color(i).name()
            parts.append(f"<b>{i + 1}</b>&nbsp;<span style='color:{color}'>■</span>&nbsp;{c}")
        self.classes_label.setText("Classes:&nbsp; " + " &nbsp;·&nbsp; ".join(parts))

    # ---- refresh from the session ----------------------------------------------------------
    def _on_session_event(self, kind: str, payload: Any) -> None:
        if kind == "edited":
            self._refresh_labels()
            self.bus.labels_changed.emit()
        elif kind == "fitted":
            self._refresh_fit()
            self.bus.fit_changed.emit()
        self._update_status()
        self._update_enabled()

    def _refresh_labels(self) -> None:
        self.model.update_values("label", self._labels())
        self.model.update_values("review", self._review_names())
        self._style_rows()
        if self.model.sort_key in ("label", "review"):
            self.model.sort_by(self.model.sort_key, self.model.sort_descending)
        self.apply_filters()
        known = {self.class_filter.itemData(i) for i in range(self.class_filter.count())}
        for c in self.session.classes if self.session else []:
            if c not in known:
                self.class_filter.addItem(c, c)
        self._show_classes()
        self.row_panel.refresh()

    def _refresh_fit(self) -> None:
        s = self.session
        assert s is not None
        for key in FIT_KEYS:
            self.model.update_values(key, self._fit_column(key))
        if self.model.sort_key:
            # Re-sort on the new values; a layout change keeps the selection on its rows.
            self.model.sort_by(self.model.sort_key, self.model.sort_descending)
        self._style_rows()
        self.apply_filters()
        self.settings_panel.show_used(s.latest.settings if s.latest else None)
        self.row_panel.refresh()
        self._show_classes()
        if not self._sized_with_fit:
            self.table.resizeColumnsToContents()
            self._sized_with_fit = True
        if not self.table.selectionModel().hasSelection():
            self._select_view_row(0)

    def _update_status(self) -> None:
        s = self.session
        if s is None:
            self.status_label.setText("Open a data file to begin (Ctrl+O).")
            return
        st = s.status()
        parts = [f"{st['rows']} rows"]
        zones = st.get("zones")
        if zones:
            parts.append(
                " / ".join(f"{zones.get(z, 0)} {z.replace('_', ' ')}" for z in palette.ZONES)
            )
        parts.append(f"{st['reviewed']} reviewed")
        parts.append(f"{st['events']} edits")
        parts.append(Path(st["session_file"]).name)
        parts.append("read-only" if st["read_only"] else "saved")
        if s.latest is None:
            parts.append("no fit yet")
        elif not st["fit_is_current"]:
            parts.append("⚠ fit is stale: refit (F5)")
        self.status_label.setText("   ·   ".join(parts))
        self.status_label.setToolTip(st["session_file"])

    def _update_enabled(self) -> None:
        s = self.session
        has = s is not None
        writable = has and not s.read_only
        for act in (
            self.act_confirm,
            self.act_relabel,
            self.act_exclude,
            self.act_restore,
            self.act_note,
            *self.act_number,
        ):
            act.setEnabled(writable)
        self.act_take_model.setEnabled(writable and s.latest is not None)
        self.act_undo.setEnabled(writable and s.can_undo)
        self.act_redo.setEnabled(writable and s.can_redo)
        self.act_export.setEnabled(has)
        running = self.runner.is_running
        self.act_refit.setEnabled(has and not running)
        self.settings_panel.refit_button.setEnabled(has and not running)
        self.act_cancel.setEnabled(running)

    # ---- filtering and selection -----------------------------------------------------------
    def apply_filters(self) -> None:
        s = self.session
        if s is None:
            return
        zone = self.zone_filter.currentData()
        cls = self.class_filter.currentData()
        state = self.state_filter.currentData()
        mask = door.row_mask(
            s.n_rows,
            zones=self._fit_column("zone") if zone != ALL else None,
            zone=None if zone == ALL else zone,
            labels=self._labels(),
            label=None if cls in (ALL, None) else cls,
            review=s.review,
            state=None if state == ALL else state,
            ids=s.ids,
            id_text=self.id_filter.text(),
            extra=self._bus_mask,
        )
        self.model.set_filter(mask)
        self.shown_label.setText(f"{self.model.rowCount()} of {s.n_rows} rows shown")

    def _on_bus_filter(self, mask: object) -> None:
        self._bus_mask = None if mask is None else np.asarray(mask, dtype=bool)
        self.apply_filters()

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

    def _select_view_row(self, view_row: int) -> None:
        if not 0 <= view_row < self.model.rowCount():
            return
        idx = self.model.index(view_row, 0)
        self.table.selectionModel().setCurrentIndex(
            idx,
            self.table.selectionModel().SelectionFlag.ClearAndSelect
            | self.table.selectionModel().SelectionFlag.Rows,
        )
        self.table.scrollTo(idx)

    def select_row(self, row: int) -> None:
        """Make source ``row`` current (if the filters show it)."""
        v = self.model.view_row(row)
        if v is not None:
            self._select_view_row(v)

    def _on_current_changed(self, current, previous) -> None:
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

    def _advance(self, rows: list[int]) -> None:
        """Move the cursor to the next open row after the decided ones, in view order."""
        s = self.session
        if s is None or self.model.rowCount() == 0:
            return
        views = [self.model.view_row(r) for r in rows]
        views = [v for v in views if v is not None]
        start = (max(views) + 1) if views else 0
        target = door.next_open_position(s.review[self.model.view_order()], start)
        if target is not None:
            self._select_view_row(target)

    def _focus_find(self) -> None:
        self.id_filter.setFocus()
        self.id_filter.selectAll()

    # ---- decisions -------------------------------------------------------------------------
    def _take_reason(self) -> str:
        reason = self.reason_combo.currentText().strip()
        self.reason_combo.setCurrentIndex(0)
        self.reason_combo.setEditText("")
        return reason

    def _decide(self, fn, *, advance: bool = True) -> None:
        s = self.session
        if s is None:
            return
        rows = self.selected_rows()
        if not rows:
            self.statusBar().showMessage("Select a row first.", 4000)
            return
        try:
            fn(s, rows, self._take_reason())
        except ReviewerError as exc:
            self._error(str(exc))
            return
        if advance:
            self._advance(rows)

    def confirm(self) -> None:
        self._decide(lambda s, rows, reason: s.confirm(rows, reason=reason))

    def exclude(self) -> None:
        self._decide(lambda s, rows, reason: s.exclude(rows, reason=reason))

    def restore(self) -> None:
        self._decide(lambda s, rows, reason: s.restore(rows, reason=reason), advance=False)

    def relabel_to(self, label: str) -> None:
        self._decide(lambda s, rows, reason: s.relabel(rows, label, reason=reason))

    def relabel_number(self, n: int) -> None:
        s = self.session
        if s is None:
            return
        classes = s.classes
        if not 1 <= n <= len(classes):
            self.statusBar().showMessage(
                f"There is no class {n}; classes are 1–{len(classes)}.", 4000
            )
            return
        self.relabel_to(classes[n - 1])

    def take_model_label(self) -> None:
        self._decide(lambda s, rows, reason: s.take_model_label(rows, reason=reason))

    def relabel_pick(self) -> None:
        s = self.session
        if s is None or not self.selected_rows():
            return
        label, ok = QInputDialog.getItem(
            self, "Relabel", "New label (pick a class or type a new name):", s.classes, 0, True
        )
        if ok and label.strip():
            self.relabel_to(label.strip())

    def add_note(self) -> None:
        s = self.session
        if s is None:
            return
        text, ok = QInputDialog.getMultiLineText(self, "Add a note", "Note on the selected rows:")
        if ok and text.strip():
            rows = self.selected_rows()
            try:
                s.add_note(rows, text.strip())
            except ReviewerError as exc:
                self._error(str(exc))

    def undo(self) -> None:
        self._step(lambda s: s.undo())

    def redo(self) -> None:
        self._step(lambda s: s.redo())

    def _step(self, fn) -> None:
        s = self.session
        if s is None:
            return
        try:
            ev = fn(s)
        except ReviewerError as exc:
            self._error(str(exc))
            return
        if ev is not None and ev.rows:
            self.select_row(ev.rows[0])

    # ---- fitting ---------------------------------------------------------------------------
    def refit(self, settings: Any = None) -> None:
        """Start a fit of the current labels in the background (no-op while one runs)."""
        s = self.session
        if s is None or self.runner.is_running:
            return
        try:
            chosen = settings or self.settings_panel.settings()
            if chosen != s.settings:
                s.set_settings(chosen)
            self._job = s.prepare_fit(chosen)
        except ReviewerError as exc:
            self._error(str(exc))
            return
        self.runner.start(ReviewSession.compute_fit, self._job)
        self.progress.setValue(0)
        self.progress_text.setText("fitting…")
        for w in (self.progress, self.progress_text, self.cancel_button):
            w.show()
        self._update_enabled()

    def _on_refit_requested(self, settings: object) -> None:
        if settings is not None:
            self.settings_panel.set_settings(settings)  # type: ignore[arg-type]
        self.refit(settings)

    def cancel_fit(self) -> None:
        if self.runner.is_running:
            self.progress_text.setText("cancelling…")
            self.runner.cancel()

    def _fit_progress(self, fraction: float, message: str) -> None:
        self.progress.setValue(int(fraction * 1000))
        self.progress_text.setText(message)

    def _fit_done(self) -> None:
        for w in (self.progress, self.progress_text, self.cancel_button):
            w.hide()
        self._update_enabled()

    def _fit_finished(self, result: object) -> None:
        job, self._job = self._job, None
        self._fit_done()
        if self.session is not None and job is not None:
            self.session.apply_fit(job, result)  # type: ignore[arg-type]
            self.statusBar().showMessage("Fit finished.", 4000)

    def _fit_failed(self, message: str) -> None:
        self._job = None
        self._fit_done()
        self._error(f"The fit failed: {message}")

    def _fit_cancelled(self) -> None:
        self._job = None
        self._fit_done()
        self.statusBar().showMessage("Fit cancelled; the previous fit stays.", 6000)

    # ---- opening ---------------------------------------------------------------------------
    def choose_file(self) -> None:
        path, _ = QFileDialog.getOpenFileName(
            self,
            "Open a labelled table",
            "",
            "Tables (*.csv *.tsv *.txt *.parquet *.xlsx *.xls);;All files (*)",
        )
        if path:
            self.open_path(Path(path))

    def ask_roles(self, path: Path) -> tuple[str, str | None, dict[str, str]] | None:
        """Show the column-roles dialog for ``path``; None when the reviewer cancels."""
        try:
            preview = ReviewSession.preview(path)
        except ReviewerError as exc:
            self._error(str(exc))
            return None
        dlg = RolesDialog(preview, self)
        if dlg.exec() != QDialog.DialogCode.Accepted:
            return None
        return dlg.choices()

    def open_path(
        self,
        path: Path,
        label: str | None = None,
        id_column: str | None = None,
        session_path: str | os.PathLike[str] | None = None,
    ) -> bool:
        """Open ``path``: the roles dialog first when no label is given. True when opened."""
        overrides: dict[str, str] | None = None
        if label is None:
            chosen = self.ask_roles(Path(path))
            if chosen is None:
                return False
            label, id_column, overrides = chosen
        return self.open_session(Path(path), label, id_column, session_path, overrides)

    def open_session(
        self,
        path: Path,
        label: str | None,
        id_column: str | None,
        session_path: str | os.PathLike[str] | None = None,
        overrides: dict[str, str] | None = None,
    ) -> bool:
        kwargs: dict[str, Any] = dict(
            label=label, id_column=id_column, session_path=session_path, overrides=overrides
        )
        try:
            session = self._open_with_progress(path, **kwargs)
        except SourceChangedError as exc:
            choice = self.ask_source_changed(str(exc))
            if choice is None:
                return False
            try:
                session = self._open_with_progress(path, **kwargs, **{choice: True})
            except ReviewerError as exc2:
                self._error(str(exc2))
                return False
        except ReviewerError as exc:
            self._error(str(exc))
            return False
        self.set_session(session)
        return True

    def _open_with_progress(self, path: Path, **kwargs: Any) -> ReviewSession:
        """Load the file and open its session on a worker thread while the window keeps
        painting; returns when done. The session file's connection is shared across threads
        under its own lock, so the session may be built off the GUI thread."""
        self.progress.setValue(0)
        self.progress.show()
        self.progress_text.setText("loading…")
        self.progress_text.show()
        self.menuBar().setEnabled(False)  # no second open or export while this one runs
        for bar in self.findChildren(QToolBar):
            bar.setEnabled(False)
        runner = TaskRunner(self)
        loop = QEventLoop()
        outcome: dict[str, Any] = {}

        def job(progress, cancel) -> tuple[str, Any]:
            try:
                return "ok", ReviewSession.open(path, progress=progress, cancel=cancel, **kwargs)
            except ReviewerError as exc:  # handed back whole: the type decides what to ask
                return "error", exc

        def on_progress(fraction: float, message: str) -> None:
            self.progress.setValue(int(fraction * 1000))
            self.progress_text.setText(message or "loading…")

        def finish(kind: str, value: Any) -> None:
            outcome[kind] = value
            loop.quit()

        runner.progress.connect(on_progress)
        runner.finished.connect(lambda result: finish(*result))
        runner.failed.connect(lambda message: finish("failed", message))
        runner.cancelled.connect(lambda: finish("failed", "opening was cancelled"))
        try:
            runner.start(job)
            if runner.is_running:
                loop.exec()
        finally:
            self.progress.hide()
            self.progress_text.hide()
            self.menuBar().setEnabled(True)
            for bar in self.findChildren(QToolBar):
                bar.setEnabled(True)
        if "ok" in outcome:
            return outcome["ok"]
        if "error" in outcome:
            raise outcome["error"]
        raise ReviewerError(f"{path}: {outcome.get('failed', 'could not be opened')}")

    def ask_source_changed(self, message: str) -> str | None:
        """ "read_only", "reattach" or None (cancel)."""
        box = QMessageBox(self)
        box.setIcon(QMessageBox.Icon.Warning)
        box.setWindowTitle("The data file changed")
        box.setText(message)
        ro = box.addButton("Open read-only", QMessageBox.ButtonRole.AcceptRole)
        re = box.addButton("Re-attach by id", QMessageBox.ButtonRole.ActionRole)
        box.addButton(QMessageBox.StandardButton.Cancel)
        box.exec()
        if box.clickedButton() is ro:
            return "read_only"
        if box.clickedButton() is re:
            return "reattach"
        return None

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        files = recent_files()
        if not files:
            act = self.recent_menu.addAction("(none yet)")
            act.setEnabled(False)
        for f in files:
            self.recent_menu.addAction(f, lambda f=f: self.open_path(Path(f)))

    # ---- export, help, errors --------------------------------------------------------------
    def export_dialog(self) -> None:
        s = self.session
        if s is None:
            return
        dlg = ExportDialog(s, self)
        if dlg.exec() != QDialog.DialogCode.Accepted:
            return
        out, audit, report, keep = dlg.values()
        images = {}
        if report:
            from reviewer.gui.views import render_views_png

            images = render_views_png(s, getattr(self, "views_panel", None))
        try:
            written = s.export(out, audit=audit, report=report, keep_excluded=keep, images=images)
        except ReviewerError as exc:
            self._error(str(exc))
            return
        self.statusBar().showMessage("Wrote " + ", ".join(str(p) for p in written), 10000)

    def show_help(self) -> None:
        dlg = QDialog(self)
        dlg.setWindowTitle("Keys and caution")
        dlg.resize(620, 560)
        lay = QVBoxLayout(dlg)
        text = QTextBrowser()
        text.setObjectName("help_text")
        text.setHtml(help_html())
        lay.addWidget(text)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(dlg.reject)
        lay.addWidget(buttons)
        self.help_dialog = dlg
        dlg.show()

    def _error(self, message: str) -> None:
        self.last_message = message
        if os.environ.get("QT_QPA_PLATFORM") == "offscreen" and os.environ.get(
            "REVIEWER_NO_DIALOGS"
        ):
            self.statusBar().showMessage(message, 10000)
            return
        QMessageBox.warning(self, "Margin Reviewer", message)

    # ---- plots from elsewhere --------------------------------------------------------------
    def install_views(self, widget: QWidget) -> None:
        """Put the plot views in the right-hand dock."""
        self.views_slot.setWidget(widget)
        self.views_slot.show()

    def _install_plot_views(self, session: ReviewSession) -> None:
        from reviewer.gui.views import ViewsPanel

        old = getattr(self, "views_panel", None)
        if old is not None:
            old.shutdown()
            old.deleteLater()
        self.views_panel = ViewsPanel(session, self.bus, self)
        self.install_views(self.views_panel)

    def closeEvent(self, event: QCloseEvent) -> None:
        self.runner.shutdown()
        if getattr(self, "views_panel", None) is not None:
            self.views_panel.shutdown()
        if self.session is not None:
            self.session.close()
            self.session = None
        super().closeEvent(event)


class ExportDialog(QDialog):
    """Cleaned file, optional audit log and report, keep-excluded."""

    def __init__(self, session: ReviewSession, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Export")
        src = session.loaded.source.path
        form = QFormLayout(self)
        self.out = QLineEdit(str(src.with_name(f"{src.stem}.cleaned{src.suffix}")))
        self.audit = QLineEdit(str(src.with_name(f"{src.stem}.audit.csv")))
        self.report = QLineEdit("")
        self.report.setPlaceholderText("optional, e.g. summary.html")
        self.keep = QCheckBox("Keep excluded rows (marked) instead of dropping them")
        form.addRow("Cleaned file", self._with_browse(self.out))
        form.addRow("Audit log", self._with_browse(self.audit))
        form.addRow("Report (HTML)", self._with_browse(self.report))
        form.addRow("", self.keep)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Export")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)
        self.resize(640, 200)

    def _with_browse(self, edit: QLineEdit) -> QWidget:
        w = QWidget()
        lay = QHBoxLayout(w)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(edit, 1)
        b = QPushButton("…")
        b.setMaximumWidth(32)
        b.clicked.connect(lambda: self._browse(edit))
        lay.addWidget(b)
        return w

    def _browse(self, edit: QLineEdit) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Save as", edit.text())
        if path:
            edit.setText(path)

    def values(self) -> tuple[str, str | None, str | None, bool]:
        return (
            self.out.text().strip(),
            self.audit.text().strip() or None,
            self.report.text().strip() or None,
            self.keep.isChecked(),
        )


def recent_files() -> list[str]:
    value = app_settings().value(RECENT_KEY, [])
    if isinstance(value, str):
        value = [value]
    return [str(v) for v in (value or []) if Path(str(v)).exists()]


def remember_recent(path: Path) -> None:
    p = str(Path(path).resolve())
    files = [p, *[f for f in recent_files() if f != p]][:MAX_RECENT]
    app_settings().setValue(RECENT_KEY, files)
