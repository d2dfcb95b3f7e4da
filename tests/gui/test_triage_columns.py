"""The list can show any column of the table; long text is cut to one line with the whole
value in the tooltip, and the choice of columns is remembered."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from PySide6.QtCore import Qt

from reviewer.core.review.session import ReviewSession
from reviewer.gui.bus import ReviewBus
from reviewer.gui.triage_list import TriageList


def _table(tmp_path: Path) -> Path:
    rng = np.random.default_rng(3)
    n = 60
    notes = [
        f"order {i}: the {'sink' if i % 2 else 'socket'} is broken\nsecond line of the note "
        + "with more words " * 6
        for i in range(n)
    ]
    frame = pd.DataFrame(
        {
            "order_id": [f"WO-{i:03d}" for i in range(n)],
            "floor": rng.integers(0, 5, n),
            "hours": rng.normal(3, 1, n).round(2),
            "note": notes,
            "trade": np.where(np.arange(n) % 2 == 1, "plumbing", "electrical"),
        }
    )
    path = tmp_path / "orders.csv"
    frame.to_csv(path, index=False)
    return path


def _list(qtbot, session: ReviewSession) -> TriageList:
    triage = TriageList(ReviewBus())
    qtbot.addWidget(triage)
    triage.resize(800, 400)
    triage.show()
    triage.set_session(session)
    return triage


def test_any_column_can_be_shown_and_the_choice_is_remembered(qtbot, tmp_path) -> None:
    with ReviewSession.open(_table(tmp_path), label="trade", id_column="order_id") as s:
        triage = _list(qtbot, s)
        menu = triage.chooser_menu()
        offered = [a.text() for a in menu.actions()]
        # Every table column but the id is offered (the label too), the id column stays.
        assert {"floor", "hours", "note", "Label"} <= set(offered)
        assert "order_id" not in offered
        shown = triage.shown_columns()
        assert "col:floor" in shown and "col:hours" in shown
        note_is_feature = "note" in s.roles.features
        assert ("col:note" in shown) == note_is_feature

        # Tick it in the menu: the column shows, one line per row, the whole note on hover.
        action = next(a for a in menu.actions() if a.text() == "note")
        if not note_is_feature:
            action.trigger()
        assert "col:note" in triage.shown_columns()
        m = triage.model
        col = m.column_index("col:note")
        idx = m.index(0, col)
        row = m.source_row(0)
        shown_text = m.data(idx, Qt.ItemDataRole.DisplayRole)
        assert "\n" not in shown_text and shown_text.endswith("…")
        tip = m.data(idx, Qt.ItemDataRole.ToolTipRole)
        assert "second line of the note" in tip and f"order {row}:" in tip
        assert triage.table.columnWidth(col) <= 220

        # Hide a feature column; a new list (the next session) starts with the same choice.
        triage.show_column("col:hours", False)
        again = _list(qtbot, s)
        assert "col:note" in again.shown_columns()
        assert "col:hours" not in again.shown_columns()
