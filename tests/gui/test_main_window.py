"""The review window driven as a reviewer would: keys and clicks, checked on the session."""

from __future__ import annotations

import shutil
import time
from pathlib import Path

import numpy as np
import pandas as pd
from PySide6.QtCore import Qt, QTimer

from reviewer.core import values
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings
from reviewer.gui.main_window import MainWindow
from reviewer.gui.reporting import MessageLog

DEMO = Path(__file__).resolve().parents[2] / "reviewer" / "demo_data" / "coffee_lots.csv"
FAST = FitSettings(kernel="rbf", C=10, folds=3)


def open_demo(tmp_path: Path) -> ReviewSession:
    data = tmp_path / "coffee_lots.csv"
    if not data.exists():
        shutil.copy(DEMO, data)
    session = ReviewSession.open(data, label="grade", id_column="lot_id")
    if session.latest is None:
        session.set_settings(FAST)
    return session


def make_window(qtbot, session: ReviewSession) -> MainWindow:
    win = MainWindow(session, reporter=MessageLog())
    qtbot.addWidget(win)
    win.show()
    qtbot.waitUntil(
        lambda: win.session.latest is not None and not win.runner.is_running, timeout=120_000
    )
    win.table.setFocus()
    return win


def shown(win: MainWindow, key: str, row: int):
    spec = win.model.column_spec(key)
    return spec.values[row]


def test_review_by_keyboard_then_refit(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    # The first fit started by itself and the list is in rank order, top row current.
    assert win.model.sort_key == "rank"
    ranks = s.latest.rows["rank"].to_numpy()
    top = win.model.source_row(0)
    assert ranks[top] == ranks.min()
    assert win.current_row() == top
    status = win.status_label.text()
    assert "1,800 rows" in status and "saved" in status

    # Down arrow moves the cursor; K keeps that row and moves on to the next unreviewed.
    qtbot.keyClick(win.table, Qt.Key.Key_Down)
    second = win.model.source_row(1)
    assert win.current_row() == second
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    assert values.REVIEW_NAMES[s.review[second]] == "confirmed"
    assert win.current_row() == win.model.source_row(2)
    assert shown(win, "review", second) == "confirmed"

    # A number key relabels to that class (numbering shown above the list).
    target = win.current_row()
    classes = s.classes
    new = classes[0] if s.labels[target] != classes[0] else classes[1]
    assert f"{classes.index(new) + 1}</b>" in win.classes_label.text()
    qtbot.keyClick(win.table, getattr(Qt.Key, f"Key_{classes.index(new) + 1}"))
    assert s.labels[target] == new
    assert shown(win, "label", target) == new
    assert "stale" in win.status_label.text()

    # Refit with F5: the list shows the new fit, whose labels include the relabelled row.
    old_latest = s.latest
    qtbot.keyClick(win.table, Qt.Key.Key_F5)
    qtbot.waitUntil(
        lambda: s.latest is not old_latest and not win.runner.is_running, timeout=120_000
    )
    assert s.fit_is_current
    assert "stale" not in win.status_label.text()
    assert shown(win, "label", target) == new
    assert np.array_equal(
        win.model.column_spec("slack").values, s.latest.rows["slack"].to_numpy(dtype=float)
    )
    # Still sorted by rank of the new fit, and the cursor stayed on its row.
    order = win.model.view_order()
    assert np.all(np.diff(s.latest.rows["rank"].to_numpy()[order]) >= 0)
    assert win.current_row() == win.model.source_row(win.table.currentIndex().row())


def test_bulk_exclude_is_one_undo_step(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    # Select three rows with Shift+Down, then X.
    qtbot.keyClick(win.table, Qt.Key.Key_Down, Qt.KeyboardModifier.ShiftModifier)
    qtbot.keyClick(win.table, Qt.Key.Key_Down, Qt.KeyboardModifier.ShiftModifier)
    rows = sorted(win.selected_rows())
    assert len(rows) == 3
    events_before = s.n_events
    qtbot.keyClick(win.table, Qt.Key.Key_X)
    assert s.excluded[rows].all()
    assert s.n_events == events_before + 1
    assert all(shown(win, "review", r) == "excluded" for r in rows)

    qtbot.keyClick(win.table, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert not s.excluded[rows].any()
    assert all(shown(win, "review", r) == "open" for r in rows)
    qtbot.keyClick(win.table, Qt.Key.Key_Y, Qt.KeyboardModifier.ControlModifier)
    assert s.excluded[rows].all()

    # Shift+X restores the current row; the state filter narrows the list.
    win.select_row(rows[0])
    qtbot.keyClick(win.table, Qt.Key.Key_X, Qt.KeyboardModifier.ShiftModifier)
    assert not s.excluded[rows[0]]
    win.state_filter.setCurrentIndex(win.state_filter.findData("excluded"))
    shown_rows = set(win.model.view_order().tolist())
    assert shown_rows == set(rows[1:])


def test_reason_goes_with_the_next_decision_only(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    win.reason_combo.setCurrentText(values.REASONS[0])
    row = win.current_row()
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    assert s.events()[-1].reason == values.REASONS[0]
    assert s.events()[-1].rows == (row,)
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    assert s.events()[-1].reason == ""
    # The row panel shows the row's own history.
    win.select_row(row)
    assert "confirm" in win.row_panel.history.toPlainText()


def test_take_model_label_and_filters(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    row = win.current_row()
    model_label = s.latest.rows["model_label"].to_numpy()[row]
    assert model_label != s.labels[row]  # the top row sits on the wrong side
    qtbot.keyClick(win.table, Qt.Key.Key_M)
    assert s.labels[row] == model_label
    win.zone_filter.setCurrentIndex(win.zone_filter.findData("wrong_side"))
    zones = s.latest.rows["zone"].to_numpy()
    assert all(zones[r] == "wrong_side" for r in win.model.view_order())
    win.id_filter.setText(str(s.ids[row]))
    assert win.model.view_order().tolist() == [row]
    # A mask from another panel narrows the list further.
    win.id_filter.setText("")
    mask = np.zeros(s.n_rows, dtype=bool)
    mask[[row, 5]] = True
    win.bus.rows_filter.emit(mask)
    assert set(win.model.view_order().tolist()) <= {row, 5}


def test_cancelled_fit_leaves_the_previous_fit(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    before = s.latest
    slack_before = win.model.column_spec("slack").values.copy()
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    win.settings_panel.folds.setValue(5)
    qtbot.keyClick(win.table, Qt.Key.Key_F5)
    assert win.runner.is_running and win.cancel_button.isVisible()
    qtbot.mouseClick(win.cancel_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: not win.runner.is_running, timeout=120_000)
    assert s.latest is before
    assert not win.cancel_button.isVisible()
    assert np.array_equal(win.model.column_spec("slack").values, slack_before)


def test_reopening_resumes_the_session(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    kept = win.current_row()
    qtbot.keyClick(win.table, Qt.Key.Key_C)
    excluded = win.current_row()
    qtbot.keyClick(win.table, Qt.Key.Key_X)
    slack = win.session.latest.rows["slack"].to_numpy().copy()
    win.close()

    again = MainWindow(open_demo(tmp_path))
    qtbot.addWidget(again)
    again.show()
    # The saved fit is shown at once: no new fit is started.
    assert not again.runner.is_running
    assert np.allclose(again.model.column_spec("slack").values, slack)
    assert shown(again, "review", kept) == "confirmed"
    assert shown(again, "review", excluded) == "excluded"
    assert again.session.can_undo


def test_gui_stays_responsive_during_a_large_fit(qtbot, tmp_path):
    rng = np.random.default_rng(7)
    n = 20_000
    X = rng.normal(size=(n, 5))
    # Overlapping classes: many bound support vectors keep the solver busy for a while.
    y = np.where(X[:, 0] + 0.5 * X[:, 1] + rng.normal(scale=1.0, size=n) > 0, "a", "b")
    frame = pd.DataFrame(X, columns=[f"f{i}" for i in range(5)])
    frame["id"] = [f"r{i}" for i in range(n)]
    frame["label"] = y
    path = tmp_path / "big.csv"
    frame.to_csv(path, index=False)
    session = ReviewSession.open(path, label="label", id_column="id")
    # The exact dual solver keeps the worker busy for several seconds on any machine, so
    # the GUI thread can be watched while it runs.
    session.set_settings(FitSettings(kernel="rbf", C=1, folds=2, solver="exact"))
    win = MainWindow(session, reporter=MessageLog())
    qtbot.addWidget(win)
    win.show()
    qtbot.waitUntil(lambda: win.runner.is_running, timeout=10_000)

    ticks: list[float] = []
    timer = QTimer()
    timer.setInterval(50)
    timer.timeout.connect(lambda: ticks.append(time.perf_counter()))
    timer.start()
    # Watch for a few seconds of the fit (or all of it, if it ends sooner), then cancel.
    qtbot.waitUntil(lambda: len(ticks) > 60 or not win.runner.is_running, timeout=60_000)
    was_running = win.runner.is_running
    win.cancel_fit()
    qtbot.waitUntil(lambda: not win.runner.is_running, timeout=120_000)
    timer.stop()
    assert was_running, "the fit ended before the GUI could be watched"
    gaps = np.diff(ticks)
    assert gaps.max() < 0.25, f"the GUI thread stalled for {gaps.max():.2f} s"


def test_a_formula_like_new_label_is_told_to_the_reviewer_once(qtbot, tmp_path):
    # OWASP CSV injection: a label beginning with "=" would run in a spreadsheet.
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    row = win.current_row()
    win.relabel_to("=HYPERLINK(1)")
    assert s.labels[row] == "=HYPERLINK(1)"  # kept exactly
    told = [m for m in win.reporter.messages if "spreadsheet formula" in m]
    assert len(told) == 1
    win.relabel_to("+again")
    assert len([m for m in win.reporter.messages if "spreadsheet formula" in m]) == 1


def test_a_malformed_cluster_address_is_told_and_no_fit_starts(qtbot, tmp_path):
    win = make_window(qtbot, open_demo(tmp_path))
    s = win.session
    before = s.latest
    win.settings_panel.cluster.setText("scheduler:8786")
    qtbot.keyClick(win.table, Qt.Key.Key_F5)
    assert not win.runner.is_running and s.latest is before
    told = [m for m in win.reporter.messages if "scheduler:8786" in m]
    assert len(told) == 1 and "tcp://" in told[0]
    # Emptied again, the fit runs on this computer.
    win.settings_panel.cluster.setText("")
    qtbot.keyClick(win.table, Qt.Key.Key_F5)
    qtbot.waitUntil(lambda: not win.runner.is_running, timeout=120_000)
    assert s.cluster is None and s.latest is not before
