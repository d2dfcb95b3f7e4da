"""Reading a row: the text in full with its telling terms marked, and the columns the model
leaves out shown one line each without widening the window."""

from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd
from PySide6.QtGui import QTextCursor

from reviewer.core.review.session import ReviewSession
from reviewer.gui.bus import ReviewBus
from reviewer.gui.row_panel import RowPanel
from reviewer.gui.text_view import MarkedText, ReadingPart, find_marks

DEMO = Path(__file__).resolve().parents[2] / "reviewer" / "demo_data" / "coffee_lots.csv"


def _terms(rows: list[tuple[str, str, float]], column: str = "description") -> pd.DataFrame:
    frame = pd.DataFrame(
        {
            "column": column,
            "term": [r[0] for r in rows],
            "kind": [r[1] for r in rows],
            "contribution": [r[2] for r in rows],
        }
    )
    frame.attrs.update(reason="", towards="plumbing", against="hvac")
    return frame


def test_marks_follow_tokens_word_pairs_and_character_grams() -> None:
    text = "Tap dripping under the sink; the tapware is fine. Drip tray full."
    marks = find_marks(
        text,
        _terms([("tap", "word", 0.5), ("the sink", "word", 0.3), (" dri", "char", 0.1)]),
    )
    spans = {(m.term, text[m.start : m.end]) for m in marks}
    # "tap" matches the word, not the start of "tapware"; case does not matter.
    assert ("tap", "Tap") in spans
    assert not any(m.term == "tap" and m.start > 0 for m in marks)
    assert ("the sink", "the sink") in spans
    # A character gram with a leading space only matches at a word start.
    assert sorted(text[m.start : m.end] for m in marks if m.kind == "char") == ["Dri", "dri"]


def test_marked_text_shows_everything_and_tells_what_a_mark_means(qtbot) -> None:
    view = MarkedText()
    qtbot.addWidget(view)
    text = "Leak under the kitchen sink <b>not bold</b>\nsecond line " + "word " * 200
    view.show_fields([("description", text)], _terms([("sink", "word", 0.8)]), "plumbing")
    # The whole text, markup shown as typed (escaped), line break kept.
    assert view.toPlainText().split("\n")[1] == text.split("\n")[0]
    assert view.toPlainText().rstrip().endswith("word")
    assert view.marked_terms() == ["sink"]
    # The mark is bold and carries a tooltip with the term and its contribution.
    doc = view.document().toPlainText()
    at = doc.index("sink") + 2
    cursor = QTextCursor(view.document())
    cursor.setPosition(at)
    fmt = cursor.charFormat()
    assert fmt.fontWeight() >= 600
    assert "sink" in fmt.toolTip() and "+0.8" in fmt.toolTip()
    assert view.isReadOnly()


def test_reading_part_says_why_nothing_is_marked(qtbot) -> None:
    part = ReadingPart()
    qtbot.addWidget(part)
    part.show()
    empty = pd.DataFrame(columns=["column", "term", "kind", "contribution"])
    empty.attrs.update(reason="per-term contributions need a linear kernel", towards=None)
    part.show_row([("description", "boiler cold")], empty, [])
    assert "linear kernel" in part.legend.text()
    assert not part.other.isVisible()
    part.show_row([("description", "boiler cold")], _terms([("cold", "word", 0.2)]), [])
    assert "w_j x_j" in part.legend.text() and "plumbing" in part.legend.text()


def test_row_panel_shows_every_ignored_column_without_widening(qtbot, tmp_path) -> None:
    data = tmp_path / "coffee_lots.csv"
    shutil.copy(DEMO, data)
    frame = pd.read_csv(data)
    long_note = "a long tasting note, " * 40
    frame.loc[3, "cupper_note"] = long_note
    frame.to_csv(data, index=False)
    # The note left out of the fit, as a reviewer may choose: it must still be readable.
    with ReviewSession.open(
        data, label="grade", id_column="lot_id", overrides={"cupper_note": "ignore"}
    ) as s:
        panel = RowPanel(ReviewBus())
        qtbot.addWidget(panel)
        panel.resize(900, 300)
        panel.show()
        panel.set_session(s)
        panel.show_row(3)
        shown = panel.reading.other.values
        assert set(shown) == set(s.roles.ignored)
        assert "cupper_note" in shown
        # The full note is there (elided when drawn, whole in the tooltip).
        assert shown["cupper_note"].text() == long_note
        qtbot.waitUntil(lambda: shown["cupper_note"].is_elided())
        assert shown["cupper_note"].toolTip() == long_note
        assert panel.minimumSizeHint().width() < 900
        assert not panel.reading.text.isVisible()  # no text column here


def test_the_legend_is_one_line_and_its_tooltip_says_how_marks_are_computed(qtbot) -> None:
    part = ReadingPart()
    qtbot.addWidget(part)
    part.resize(260, 300)
    part.show()
    part.show_row([("description", "tap dripping")], _terms([("tap", "word", 0.4)]), [])
    assert "\n" not in part.legend.text()
    assert "x_j (w_plumbing,j - w_hvac,j)" in part.legend.toolTip()
    assert part.legend.minimumSizeHint().width() < 100
