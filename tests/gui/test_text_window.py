"""Reviewing a text table in the window: the current row's text is shown in full, and the
terms marked in it are the ones the linear model says pushed the row towards its label."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from PySide6.QtCore import Qt
from PySide6.QtGui import QTextCursor

from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings
from reviewer.gui.main_window import MainWindow
from reviewer.gui.reporting import MessageLog

WORK_ORDERS = Path(__file__).resolve().parents[2] / "reviewer" / "demo_data" / "work_orders.csv"
LINEAR = FitSettings(kernel="linear", C=1.0, folds=3, solver="exact")


def test_current_row_text_in_full_with_the_models_top_terms_marked(qtbot, tmp_path) -> None:
    data = tmp_path / "orders.csv"
    frame = pd.read_csv(WORK_ORDERS, nrows=360)
    # One long description with a line break, so "in full" means something.
    frame.loc[5, "description"] = (
        frame.loc[5, "description"] + "\nCaller adds: " + "it has been like this all week. " * 12
    )
    frame.to_csv(data, index=False)
    session = ReviewSession.open(data, label="trade", id_column="order_id")
    assert session.roles.text == ["description"]
    session.set_settings(LINEAR)
    win = MainWindow(session, reporter=MessageLog())
    qtbot.addWidget(win)
    win.resize(1366, 768)
    win.show()
    qtbot.waitUntil(
        lambda: win.session.latest is not None and not win.runner.is_running, timeout=300_000
    )
    win.table.setFocus()
    s = win.session
    panel = win.row_panel
    reading = panel.reading
    marked_rows = 0
    for step in range(8):
        if step:
            qtbot.keyClick(win.table, Qt.Key.Key_Down)
        row = win.current_row()
        assert row is not None and panel.row == row
        text = str(s.frame["description"].iloc[row])
        # The whole text, as typed, under its column's name.
        assert reading.text.fields == [("description", text)]
        assert reading.text.isVisible()
        shown = reading.text.toPlainText()
        for line in text.splitlines():
            assert line.strip() in shown
        # Every marked term is among the model's largest contributions for this row.
        top = s.term_contributions(row, k=12)
        assert top.attrs["reason"] == ""
        marked = reading.text.marked_terms()
        assert set(marked) <= set(top["term"])
        if marked:
            marked_rows += 1
            assert "w_j x_j" in reading.legend.text()
            # A marked word is drawn bold (not colour alone).
            mark = next(m for m in reading.text.marks if m.kind == "word")
            doc = reading.text.document().toPlainText()
            heading = len("description") + 1  # the column name on the line above
            at = doc.index(text[mark.start : mark.end], heading + mark.start) + 1
            cursor = QTextCursor(reading.text.document())
            cursor.setPosition(at)
            assert cursor.charFormat().fontWeight() >= 600
    # The model's words show up on most rows of a text table, not on none.
    assert marked_rows >= 5

    # The long description: whole in the panel, scrollable rather than widening the window.
    win.select_row(5)
    assert "\n" in reading.text.fields[0][1]
    assert reading.text.toPlainText().rstrip().endswith("all week.")
    assert win.width() <= 1366
    # The list shows the description cut to one line, the whole text in its tooltip.
    m = win.model
    col = m.column_index("col:description")
    view_row = m.view_row(5)
    assert view_row is not None
    idx = m.index(view_row, col)
    assert "\n" not in m.data(idx, Qt.ItemDataRole.DisplayRole)
    assert "all week" in m.data(idx, Qt.ItemDataRole.ToolTipRole)
    win.close()
