"""The review window: the triage list in the middle, panels in docks around it, decisions by key.

It assembles the parts (triage list, row panel, fit settings, plots, task strip), wires the
action table to its methods, and passes every decision to the session. Each dock can be
collapsed, tabbed or undocked; the layout is remembered between runs.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QCloseEvent, QShowEvent
from PySide6.QtWidgets import (
    QDialog,
    QInputDialog,
    QLabel,
    QMainWindow,
    QToolBar,
    QVBoxLayout,
    QWidget,
)

from reviewer.core.door import ReviewSession
from reviewer.core.errors import ReviewerError
from reviewer.core.values import FitSettings
from reviewer.gui import actions as action_table
from reviewer.gui import dialogs, window_layout
from reviewer.gui.bus import ReviewBus
from reviewer.gui.help_text import CAUTION
from reviewer.gui.opening import Opener
from reviewer.gui.reporting import DialogReporter, Reporter
from reviewer.gui.row_panel import RowPanel
from reviewer.gui.settings_panel import SettingsPanel
from reviewer.gui.tasks import FitTasks, TaskStrip
from reviewer.gui.triage_list import TriageList


class MainWindow(QMainWindow):
    """One window, one session at a time. ``reporter`` receives the error messages (a
    dialog by default; tests pass ``reporting.MessageLog()``)."""

    def __init__(
        self,
        session: ReviewSession | None = None,
        *,
        auto_fit: bool = True,
        reporter: Reporter | None = None,
        remember_layout: bool = True,
    ) -> None:
        super().__init__()
        self.setObjectName("main_window")
        self.setWindowTitle("Margin Reviewer")
        self.resize(*window_layout.DEFAULT_SIZE)
        self.bus = ReviewBus(self)
        self.session: ReviewSession | None = None
        self.auto_fit = auto_fit
        self.reporter: Reporter = reporter or DialogReporter()
        self.remember_layout = remember_layout
        self.last_message = ""
        self.export_folder: Path | None = None
        self.views_panel: Any = None
        self._placed = False
        window_layout.prepare(self)

        # Centre: the task strip (progress and Cancel) above the list, always on screen.
        self.task_strip = TaskStrip()
        self.fits = FitTasks(self.task_strip, self)
        self.fits.state_changed.connect(self._update_enabled)
        self.fits.message.connect(self.say)
        self.fits.failed.connect(self._error)
        self.triage = TriageList(self.bus)
        # The list's filters, reason box and class legend, by the names tests and docs use.
        self.zone_filter = self.triage.zone_filter
        self.class_filter = self.triage.class_filter
        self.state_filter = self.triage.state_filter
        self.id_filter = self.triage.id_filter
        self.reason_combo = self.triage.reason_combo
        self.classes_label = self.triage.classes_label
        self.shown_label = self.triage.shown_label
        self.bus.refit_requested.connect(self._on_refit_requested)
        centre = QWidget()
        lay = QVBoxLayout(centre)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        lay.addWidget(self.task_strip)
        lay.addWidget(self.triage, 1)
        self.setCentralWidget(centre)

        self.settings_panel = SettingsPanel()
        self.settings_panel.refit_clicked.connect(self.refit)
        left = QWidget()
        left.setObjectName("settings_column")
        left_lay = QVBoxLayout(left)
        left_lay.setContentsMargins(0, 0, 0, 0)
        left_lay.addWidget(self.settings_panel, 1)
        self.caution_label = QLabel(CAUTION)
        self.caution_label.setObjectName("caution")
        self.caution_label.setWordWrap(True)
        self.caution_label.setStyleSheet(
            "QLabel#caution { background: #FFF7E0; border: 1px solid #EBD9A6;"
            " border-radius: 5px; padding: 6px; margin: 4px; color: #4A4F57; }"
        )
        left_lay.addWidget(self.caution_label)
        self.settings_dock = window_layout.make_dock("Fit settings", "settings_dock", left, self)
        self.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, self.settings_dock)

        placeholder = QLabel("Plots appear here.")
        placeholder.setAlignment(Qt.AlignmentFlag.AlignCenter)
        placeholder.setObjectName("hint")
        self.views_slot = window_layout.make_dock("Plots", "views_slot", placeholder, self)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, self.views_slot)

        self.row_panel = RowPanel(self.bus)
        self.row_dock = window_layout.make_dock("Row", "row_dock", self.row_panel, self)
        self.addDockWidget(Qt.DockWidgetArea.BottomDockWidgetArea, self.row_dock)

        self.status_line = window_layout.StatusLine(self.statusBar())
        self.status_label = self.status_line.counts
        self.actions_by_id = action_table.build_actions(self, self)
        for act in self.actions_by_id.values():
            self.addAction(act)
        self.menus = action_table.build_menus(self.menuBar(), self.actions_by_id)
        self.recent_menu = self.menus["File"].addMenu("Open &recent")
        self.menus["File"].insertMenu(self.actions_by_id["export"], self.recent_menu)
        self.recent_menu.aboutToShow.connect(
            lambda: dialogs.fill_recent_menu(self.recent_menu, self.open_path)
        )
        view = self.menus["View"]
        first = view.actions()[0] if view.actions() else None
        for dock in (self.settings_dock, self.views_slot, self.row_dock):
            toggle = dock.toggleViewAction()
            if toggle is None:
                continue
            if first is None:
                view.addAction(toggle)
            else:
                view.insertAction(first, toggle)
        if first is not None:
            view.insertSeparator(first)
        self.toolbar = QToolBar("Main")
        self.toolbar.setObjectName("main_toolbar")
        self.toolbar.setMovable(False)
        self.toolbar.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        action_table.build_toolbar(self.toolbar, self.actions_by_id)
        self.addToolBar(self.toolbar)
        self.opener = Opener(self, self.task_strip, self._error, [self.menuBar(), self.toolbar])
        self._default_state = self.saveState(window_layout.LAYOUT_VERSION)
        window_layout.default_sizes(self, [self.settings_dock, self.views_slot], self.row_dock)
        if remember_layout:
            window_layout.restore(self)
        self._update_enabled()
        self._update_status()
        if session is not None:
            self.set_session(session)

    # ---- parts the tests and the benchmarks reach ------------------------------------------
    @property
    def table(self):
        return self.triage.table

    @property
    def model(self):
        return self.triage.model

    @property
    def runner(self):
        return self.fits.runner

    @property
    def cancel_button(self):
        return self.task_strip.cancel_button

    @property
    def progress(self):
        return self.task_strip.bar

    def selected_rows(self) -> list[int]:
        return self.triage.selected_rows()

    def current_row(self) -> int | None:
        return self.triage.current_row()

    def select_row(self, row: int) -> None:
        self.triage.select_row(row)

    # ---- layout ----------------------------------------------------------------------------
    def say(self, message: str, msecs: int = 6000) -> None:
        """A passing message at the left of the status line."""
        self.status_line.say(message, msecs)

    def reset_layout(self) -> None:
        """Docks back to where they start: settings left, plots right, the row below."""
        for dock in (self.settings_dock, self.views_slot, self.row_dock):
            dock.setFloating(False)
            dock.show()
        self.restoreState(self._default_state, window_layout.LAYOUT_VERSION)
        window_layout.default_sizes(self, [self.settings_dock, self.views_slot], self.row_dock)

    def showEvent(self, event: QShowEvent) -> None:
        if not self._placed:
            self._placed = True
            window_layout.fit_to_screen(self)
        super().showEvent(event)

    # ---- session ---------------------------------------------------------------------------
    def set_session(self, session: ReviewSession) -> None:
        """Show ``session`` (closing any previous one); starts a first fit if none is saved."""
        if self.session is not None:
            self.fits.shutdown()
            self.session.close()
        self.session = session
        session.subscribe(self._on_session_event)
        self.setWindowTitle(f"Margin Reviewer – {session.loaded.source.path.name}")
        self.settings_panel.set_settings(session.settings)
        self.settings_panel.show_used(session.latest.settings if session.latest else None)
        self.triage.set_session(session)
        self.row_panel.set_session(session)
        dialogs.remember_recent(session.loaded.source.path)
        for w in session.warnings:
            self.say(w, 10000)
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
            self.triage.select_view_row(0)

    def _on_session_event(self, kind: str, payload: Any) -> None:
        if kind == "edited":
            self.triage.refresh_labels()
            self.row_panel.refresh()
            self.bus.labels_changed.emit()
        elif kind == "fitted":
            s = self.session
            self.triage.refresh_fit()
            self.settings_panel.show_used(s.latest.settings if s and s.latest else None)
            self.row_panel.refresh()
            self.bus.fit_changed.emit()
        elif kind == "warning" and payload:
            self.reporter.warning(self, str(payload))
        self._update_status()
        self._update_enabled()

    def _update_status(self) -> None:
        self.status_line.show_session(self.session)

    def _update_enabled(self) -> None:
        busy = self.fits.is_running
        action_table.update_enabled(self.actions_by_id, self.session, busy)
        self.settings_panel.refit_button.setEnabled(self.session is not None and not busy)

    # ---- decisions -------------------------------------------------------------------------
    def _decide(self, fn: Callable[[ReviewSession, list[int], str], object], *, advance=True):
        s = self.session
        if s is None:
            return
        rows = self.triage.selected_rows()
        if not rows:
            self.say("Select a row first.", 4000)
            return
        try:
            fn(s, rows, self.triage.take_reason())
        except ReviewerError as exc:
            self._error(str(exc))
            return
        if advance:
            self.triage.advance(rows)

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
            self.say(f"There is no class {n}; classes are 1–{len(classes)}.", 4000)
            return
        self.relabel_to(classes[n - 1])

    def take_model_label(self) -> None:
        self._decide(lambda s, rows, reason: s.take_model_label(rows, reason=reason))

    def relabel_pick(self) -> None:
        s = self.session
        if s is None or not self.triage.selected_rows():
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
            try:
                s.add_note(self.triage.selected_rows(), text.strip())
            except ReviewerError as exc:
                self._error(str(exc))

    def undo(self) -> None:
        self._step(lambda s: s.undo())

    def redo(self) -> None:
        self._step(lambda s: s.redo())

    def _step(self, fn: Callable[[ReviewSession], Any]) -> None:
        s = self.session
        if s is None:
            return
        try:
            ev = fn(s)
        except ReviewerError as exc:
            self._error(str(exc))
            return
        if ev is not None and ev.rows:
            self.triage.select_row(ev.rows[0])

    def focus_find(self) -> None:
        self.triage.focus_find()

    # ---- fitting ---------------------------------------------------------------------------
    def refit(self, settings: FitSettings | None = None) -> None:
        """Start a fit of the current labels in the background (no-op while one runs)."""
        s = self.session
        if s is None or self.fits.is_running:
            return
        try:
            s.cluster = self.settings_panel.cluster_address()  # where, not what: not a setting
            self.fits.start(s, settings or self.settings_panel.settings())
        except ReviewerError as exc:
            self._error(str(exc))

    def cancel_fit(self) -> None:
        self.fits.cancel()

    def _on_refit_requested(self, settings: object) -> None:
        if isinstance(settings, FitSettings):
            self.settings_panel.set_settings(settings)
            self.refit(settings)

    # ---- opening ---------------------------------------------------------------------------
    def choose_file(self) -> None:
        path = self.opener.choose_file(self.session)
        if path is not None:
            self.open_path(path)

    def open_path(
        self,
        path: Path,
        label: str | None = None,
        id_column: str | None = None,
        session_path: str | os.PathLike[str] | None = None,
        overrides: dict[str, str] | None = None,
        vectors: Path | None = None,
    ) -> bool:
        """Open ``path``: the roles dialog first when no label is given. True when opened.
        ``overrides`` (column -> kind) and ``vectors`` (a .npy file) apply when ``label`` is
        given; the roles dialog asks for them otherwise."""
        sheet: str | None = None
        if label is None:
            chosen = self.opener.ask_roles(Path(path))
            if chosen is None:
                return False
            label, id_column, overrides, sheet, vectors = chosen
        return self.open_session(
            Path(path), label, id_column, session_path, overrides, sheet, vectors=vectors
        )

    def open_session(
        self,
        path: Path,
        label: str | None,
        id_column: str | None,
        session_path: str | os.PathLike[str] | None = None,
        overrides: dict[str, str] | None = None,
        sheet: str | None = None,
        *,
        vectors: Path | None = None,
    ) -> bool:
        session = self.opener.open(
            Path(path), label, id_column, session_path, overrides, sheet, vectors=vectors
        )
        if session is None:
            return False
        self.set_session(session)
        return True

    # ---- export, help, errors --------------------------------------------------------------
    def export_dialog(self) -> None:
        s = self.session
        if s is None:
            return
        src = s.loaded.source.path
        dlg = dialogs.ExportDialog(src, self.export_folder or src.parent, self)
        self.export_dlg = dlg
        if dlg.exec() != QDialog.DialogCode.Accepted:
            return
        self.export_to(*dlg.values())

    def export_to(
        self, out: str, audit: str | None, report: str | None, keep_excluded: bool
    ) -> list[Path]:
        s = self.session
        if s is None:
            return []
        # The report draws its own figures from the session's numbers (no widget pictures).
        try:
            written = s.export(out, audit=audit, report=report, keep_excluded=keep_excluded)
        except ReviewerError as exc:
            self._error(str(exc))
            return []
        self.say("Wrote " + ", ".join(str(p) for p in written), 10000)
        return list(written)

    def show_help(self) -> None:
        s = self.session
        score = (s.latest.settings.score if s.latest else s.settings.score) if s else "heldout"
        self.help_dialog = dialogs.HelpDialog(score, self)
        self.help_dialog.show()

    def _error(self, message: str) -> None:
        self.last_message = message
        self.say(message, 10000)
        self.reporter.error(self, message)

    # ---- plots -----------------------------------------------------------------------------
    def install_views(self, widget: QWidget) -> None:
        """Put the plot views in the plots dock."""
        self.views_slot.setWidget(widget)

    def _install_plot_views(self, session: ReviewSession) -> None:
        from reviewer.gui.views import ViewsPanel

        old = self.views_panel
        if old is not None:
            old.shutdown()
            old.deleteLater()
        self.views_panel = ViewsPanel(session, self.bus, self)
        self.install_views(self.views_panel)

    def closeEvent(self, event: QCloseEvent) -> None:
        if self.remember_layout:
            window_layout.save(self)
        self.fits.shutdown()
        if self.views_panel is not None:
            self.views_panel.shutdown()
        if self.session is not None:
            self.session.close()
            self.session = None
        super().closeEvent(event)
