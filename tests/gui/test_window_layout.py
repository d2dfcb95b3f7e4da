"""The window on a laptop screen: it fits, every panel is reachable, progress stays in view,
and the layout a reviewer arranged comes back. Driven with keys and clicks; checked on the
widgets a person looks at and on the session."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pandas as pd
from PySide6.QtCore import QPoint, QRect, Qt
from PySide6.QtGui import QKeySequence
from PySide6.QtWidgets import (
    QAbstractButton,
    QAbstractScrollArea,
    QComboBox,
    QDockWidget,
    QLineEdit,
    QWidget,
)

from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings
from reviewer.gui import actions, palette
from reviewer.gui.main_window import MainWindow
from reviewer.gui.reporting import MessageLog
from reviewer.gui.widgets import ElidedLabel

DEMO = Path(__file__).resolve().parents[2] / "reviewer" / "demo_data" / "coffee_lots.csv"
FAST = FitSettings(kernel="rbf", C=10, folds=3)
LAPTOP = (1366, 768)


def demo_window(qtbot, tmp_path: Path, **kwargs) -> MainWindow:
    data = tmp_path / "coffee_lots.csv"
    if not data.exists():
        shutil.copy(DEMO, data)
    session = ReviewSession.open(data, label="grade", id_column="lot_id")
    if session.latest is None:
        session.set_settings(FAST)
    win = MainWindow(session, reporter=MessageLog(), **kwargs)
    qtbot.addWidget(win)
    win.show()
    qtbot.waitUntil(
        lambda: win.session.latest is not None and not win.runner.is_running, timeout=120_000
    )
    return win


def window_rect(w: QWidget, win: MainWindow) -> QRect:
    return QRect(w.mapTo(win, QPoint(0, 0)), w.size())


def controls(root: QWidget) -> list[QWidget]:
    """Visible buttons, boxes, tables and plots under ``root`` (not the insides of a view,
    which scroll by design)."""
    out = []
    for w in root.findChildren(QWidget):
        if not w.isVisible():
            continue
        parent = w.parentWidget()
        inside_view = False
        while parent is not None and parent is not root:
            if isinstance(parent, QAbstractScrollArea):
                inside_view = True
                break
            parent = parent.parentWidget()
        if inside_view:
            continue
        if isinstance(w, (QAbstractButton, QComboBox, QLineEdit, QAbstractScrollArea)):
            out.append(w)
    return out


def test_minimum_size_fits_a_small_laptop(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    hint = win.minimumSizeHint()
    assert hint.width() <= 1280 and hint.height() <= 720, hint
    # A long class name or status line elides instead of widening the window.
    win.status_label.setText("x" * 2000)
    assert win.minimumSizeHint().width() <= 1280


def test_every_panel_is_on_a_1366x768_screen(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    win.resize(*LAPTOP)
    qtbot.waitUntil(lambda: win.size().toTuple() == LAPTOP, timeout=5000)
    screen = QRect(0, 0, *LAPTOP)
    docks = win.findChildren(QDockWidget)
    assert {d.objectName() for d in docks} == {"settings_dock", "views_slot", "row_dock"}
    for dock in docks:
        assert dock.isVisible() and not dock.isFloating(), dock.objectName()
        inner = dock.widget()
        # The dock got at least what its contents need, so nothing in it is squeezed away.
        assert inner.width() >= inner.minimumSizeHint().width() - 1, dock.objectName()
        assert screen.contains(window_rect(dock, win)), dock.objectName()
        for w in controls(inner):
            r = window_rect(w, win)
            assert screen.contains(r), (dock.objectName(), type(w).__name__, r)
            assert r.width() > 8 and r.height() > 8, (dock.objectName(), type(w).__name__)
    # The row panel's tables show every column, Distance included (names elide instead).
    for view in (win.row_panel.features, win.row_panel.neighbours):
        header = view.horizontalHeader()
        last = header.count() - 1
        right = header.sectionViewportPosition(last) + header.sectionSize(last)
        assert right <= view.viewport().width() + 1, view.objectName()
    # The list and the toolbar too.
    for w in (win.table, win.id_filter, win.reason_combo, win.toolbar):
        assert screen.contains(window_rect(w, win)), type(w).__name__
    # Every plot tab can be reached: the tab bar is wholly on screen.
    bar = win.views_panel.tabBar()
    for i in range(bar.count()):
        r = bar.tabRect(i)
        assert screen.contains(QRect(bar.mapTo(win, r.topLeft()), r.size())), bar.tabText(i)


def test_progress_and_cancel_are_in_view_during_a_fit(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    win.resize(*LAPTOP)
    s = win.session
    before = s.latest
    win.table.setFocus()
    qtbot.keyClick(win.table, Qt.Key.Key_F5)
    assert win.runner.is_running
    screen = QRect(0, 0, *LAPTOP)
    for w in (win.task_strip.bar, win.cancel_button):
        assert w.isVisible()
        assert screen.contains(window_rect(w, win)), type(w).__name__
    # Esc, as listed in the help, cancels; the previous fit stays and the strip goes.
    qtbot.keyClick(win.table, Qt.Key.Key_Escape)
    qtbot.waitUntil(lambda: not win.runner.is_running, timeout=120_000)
    assert not win.cancel_button.isVisible()
    assert s.latest is before or s.latest.settings.C == before.settings.C


def test_layout_is_remembered(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    # The reviewer closes the row panel and moves the plots under the settings.
    win.row_dock.toggleViewAction().trigger()
    win.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, win.views_slot)
    assert win.dockWidgetArea(win.views_slot) == Qt.DockWidgetArea.LeftDockWidgetArea
    win.close()

    again = demo_window(qtbot, tmp_path)
    assert not again.row_dock.isVisible()
    assert again.dockWidgetArea(again.views_slot) == Qt.DockWidgetArea.LeftDockWidgetArea
    # View > Reset layout puts everything back.
    again.actions_by_id["reset_layout"].trigger()
    assert again.row_dock.isVisible()
    assert again.dockWidgetArea(again.views_slot) == Qt.DockWidgetArea.RightDockWidgetArea


def test_id_filter_keeps_the_row_panel_on_a_shown_row(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    s = win.session
    first = win.current_row()
    other = win.model.source_row(5)
    assert win.row_panel.row == first
    # Type the id of another row: the list shows only it, and so does the row panel.
    qtbot.keyClicks(win.id_filter, str(s.ids[other]))
    assert win.model.view_order().tolist() == [other]
    assert win.row_panel.row == other
    assert str(s.ids[other]) in win.row_panel.title.text()
    # Down in the filter box moves into the list, on the row it shows.
    qtbot.keyClick(win.id_filter, Qt.Key.Key_Down)
    assert win.table.hasFocus()
    assert win.current_row() == other
    # A filter that matches nothing leaves no row on show.
    win.id_filter.setText("no such id at all")
    assert win.model.rowCount() == 0
    assert win.row_panel.title.text() == "No row selected"


def test_relabelled_rows_read_apart_from_the_selection(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    s = win.session
    win.table.setFocus()
    row = win.current_row()
    target = s.classes[0] if s.labels[row] != s.classes[0] else s.classes[1]
    qtbot.keyClick(win.table, getattr(Qt.Key, f"Key_{s.classes.index(target) + 1}"))
    assert s.labels[row] == target
    view = win.model.view_row(row)
    review_col = win.model.column_index("review")
    index = win.model.index(view, review_col)
    # A symbol says it without colour...
    assert win.model.data(index, Qt.ItemDataRole.DisplayRole) == "✎ relabelled"
    # ...and the tint is far from the selection colour and from the other decisions'.
    tint = win.model.data(index, Qt.ItemDataRole.BackgroundRole)
    sel = palette.qcolor(palette.SELECTION)
    styles = palette.state_row_styles()

    def distance(a, b) -> float:
        return float(np.linalg.norm(np.subtract(a.getRgb()[:3], b.getRgb()[:3], dtype=float)))

    assert distance(tint, sel) > 25
    assert distance(styles[1][0], styles[2][0]) > 25  # confirmed against relabelled


def test_status_counts_decisions_and_shows_undo_apart(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    win.table.setFocus()
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    assert "1 decision " in win.status_label.text() + " "
    qtbot.keyClick(win.table, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    text = win.status_label.text()
    assert "1 decision (1 undone)" in text and "edits" not in text


def test_help_lists_the_keys_that_work(qtbot, tmp_path):
    win = demo_window(qtbot, tmp_path)
    win.table.setFocus()
    qtbot.keyClick(win.table, Qt.Key.Key_F1)
    text = win.help_dialog.text.toPlainText()
    # The ranking is described as what it is.
    assert "held-out slack" in text
    for spec in actions.ACTIONS:
        act = win.actions_by_id[spec.id]
        assert [k.toString() for k in act.shortcuts()] == [
            QKeySequence(k).toString() for k in spec.keys
        ], spec.id
        if spec.help:
            assert actions.key_text(spec) in text and spec.help in text, spec.id
    # And the toolbar is built from the same table.
    on_bar = {a.objectName() for a in win.toolbar.actions() if a.objectName()}
    assert on_bar == {f"action_{a.id}" for a in actions.ACTIONS if a.toolbar}


def test_no_id_column_names_the_row_once(qtbot, tmp_path):
    frame = pd.read_csv(DEMO).drop(columns=["lot_id"]).head(200)
    path = tmp_path / "no_ids.csv"
    frame.to_csv(path, index=False)
    session = ReviewSession.open(path, label="grade")
    session.set_settings(FAST)
    win = MainWindow(session, reporter=MessageLog())
    qtbot.addWidget(win)
    win.show()
    qtbot.waitUntil(
        lambda: session.latest is not None and not win.runner.is_running, timeout=60_000
    )
    row = win.current_row()
    assert win.row_panel.title.text() == f"Row {row}"


def test_export_defaults_to_the_data_folder_and_browse_reads(qtbot, tmp_path, monkeypatch):
    win = demo_window(qtbot, tmp_path)
    from reviewer.gui import dialogs

    seen = {}

    def fake_exec(dlg):
        seen["browse"] = [b.text() for b in dlg.browse_buttons]
        seen["values"] = dlg.values()
        return dialogs.QDialog.DialogCode.Accepted

    monkeypatch.setattr(dialogs.ExportDialog, "exec", fake_exec)
    win.actions_by_id["export"].trigger()
    assert seen["browse"] == ["Browse…"] * 3
    out, audit, _report, _keep = seen["values"]
    assert Path(out).parent == tmp_path and Path(audit).parent == tmp_path
    assert Path(out).exists() and Path(audit).exists()


def test_open_dialog_starts_in_the_open_files_folder(qtbot, tmp_path, monkeypatch):
    win = demo_window(qtbot, tmp_path)
    from reviewer.gui import opening

    asked = {}

    def fake_open(_parent, _title, folder, _filter):
        asked["folder"] = folder
        return "", ""

    monkeypatch.setattr(opening.QFileDialog, "getOpenFileName", fake_open)
    win.actions_by_id["open"].trigger()
    assert Path(asked["folder"]) == tmp_path


def test_errors_reach_the_reporter_not_a_dialog(qtbot, tmp_path):
    log = MessageLog()
    win = MainWindow(auto_fit=False, reporter=log)
    qtbot.addWidget(win)
    assert not win.open_session(tmp_path / "absent.csv", "grade", None)
    assert "absent.csv" in log.last and "not found" in log.last


def test_long_text_elides_with_its_tooltip(qtbot):
    label = ElidedLabel("a very long label " * 20)
    qtbot.addWidget(label)
    label.resize(120, 20)
    label.show()
    assert label.is_elided() and label.shown_text().endswith("…")
    assert label.toolTip() == label.text()
    assert label.minimumSizeHint().width() < 60


def test_readme_keys_are_the_help_panels(qtbot):
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    assert actions.keys_markdown() in readme


def test_long_class_names_do_not_widen_the_window(qtbot, tmp_path):
    # Nine classes with long names, and long ids: everything that shows them elides.
    rng = np.random.default_rng(5)
    n = 270
    names = [f"a rather long class name for group number {i} of the survey" for i in range(9)]
    frame = pd.DataFrame(rng.normal(size=(n, 3)), columns=["x", "y", "z"])
    frame["item"] = [f"item-with-a-very-long-identifier-{i:05d}-from-the-archive" for i in range(n)]
    frame["kind"] = [names[i % 9] for i in range(n)]
    path = tmp_path / "long.csv"
    frame.to_csv(path, index=False)
    session = ReviewSession.open(path, label="kind", id_column="item")
    session.set_settings(FitSettings(kernel="linear", C=1, folds=2))
    win = MainWindow(session, reporter=MessageLog())
    qtbot.addWidget(win)
    win.show()
    qtbot.waitUntil(
        lambda: session.latest is not None and not win.runner.is_running, timeout=60_000
    )
    hint = win.minimumSizeHint()
    assert hint.width() <= 1280 and hint.height() <= 720, hint
    # The full name is still there to read, in the tooltip.
    assert names[8] in win.classes_label.toolTip()


def test_a_window_larger_than_the_screen_is_brought_inside_it(qtbot):
    from reviewer.gui import window_layout

    w = QWidget()
    qtbot.addWidget(w)
    w.resize(5000, 4000)
    w.move(-300, -200)
    w.show()
    window_layout.fit_to_screen(w)
    area = w.screen().availableGeometry()
    assert area.contains(w.frameGeometry())
