"""Reading a row: its text fields in full with the telling terms marked, and the columns the
model does not use, each on one elided line.

The marks come from ``ReviewSession.term_contributions``: for a linear fit, the terms with
the largest contributions x_j (w_model,j - w_given,j) to the model preferring its label.
Word terms are marked bold on a yellow tint (stronger for larger contributions); character
n-grams are underlined where the substring occurs. The tooltip on a mark gives the term and
its contribution.
"""

from __future__ import annotations

import html
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from PySide6.QtCore import QEvent, Qt
from PySide6.QtWidgets import (
    QGridLayout,
    QScrollArea,
    QTextBrowser,
    QToolTip,
    QVBoxLayout,
    QWidget,
)

from reviewer.gui import palette
from reviewer.gui.widgets import ElidedLabel

# The default token rule of scikit-learn's TfidfVectorizer: runs of two or more word characters.
TOKEN = re.compile(r"(?u)\b\w\w+\b")
SHORT = "Marked: terms pushing towards {towards} over {against} (w_j x_j of the linear model)"
HOW = (
    "Marked: the largest per-term contributions w_j x_j of the linear model to preferring "
    "{towards} over {against}, computed as x_j (w_{towards},j - w_{against},j) from the fit's "
    "one-against-the-rest weights (bold on yellow: words and word pairs, stronger for larger "
    "contributions; underlined: character n-grams). Hover a mark for its value."
)


@dataclass(frozen=True)
class Mark:
    start: int
    end: int
    term: str
    kind: str  # "word" | "char"
    contribution: float


def find_marks(text: str, terms: pd.DataFrame) -> list[Mark]:
    """Where each term of ``terms`` (columns term, kind, contribution) occurs in ``text``.

    Word terms match whole tokens (lower-cased, the vectoriser's token rule), a two-word term
    two tokens in a row; character n-grams match the substring (case-insensitive), a leading
    or trailing space meaning a word edge.
    """
    marks: list[Mark] = []
    if terms.empty or not text:
        return marks
    tokens = [(m.start(), m.end(), m.group(0).lower()) for m in TOKEN.finditer(text)]
    for term, kind, c in zip(terms["term"], terms["kind"], terms["contribution"], strict=True):
        term = str(term)
        if kind == "word":
            words = term.lower().split()
            n = len(words)
            if n == 0:
                continue
            for i in range(len(tokens) - n + 1):
                if all(tokens[i + j][2] == words[j] for j in range(n)):
                    marks.append(Mark(tokens[i][0], tokens[i + n - 1][1], term, "word", float(c)))
        elif kind == "char":
            core = term.strip()
            if len(core) < 2:
                continue
            pattern = (
                ("(?<!\\w)" if term.startswith(" ") else "")
                + re.escape(core)
                + ("(?!\\w)" if term.endswith(" ") else "")
            )
            for m in re.finditer(pattern, text, flags=re.IGNORECASE):
                marks.append(Mark(m.start(), m.end(), term, "char", float(c)))
    return marks


def marked_html(text: str, marks: Sequence[Mark], towards: str = "") -> str:
    """``text`` as HTML with ``marks`` drawn: words bold on a yellow tint, character n-grams
    underlined; each marked run has a tooltip naming its terms and contributions."""
    n = len(text)
    word = np.zeros(n)
    char = np.zeros(n, dtype=bool)
    tips: list[set[str]] = [set() for _ in range(n)]
    top = max((m.contribution for m in marks), default=0.0)
    for m in marks:
        if m.kind == "word":
            word[m.start : m.end] = np.maximum(word[m.start : m.end], m.contribution)
        else:
            char[m.start : m.end] = True
        label = f"“{m.term}”: +{m.contribution:.3g}" + (f" towards {towards}" if towards else "")
        for i in range(m.start, m.end):
            tips[i].add(label)
    # Two tint levels keep the marks readable: strong for the upper half of the contributions.
    level = np.where(word <= 0, 0, np.where(word >= top / 2, 2, 1)) if top > 0 else np.zeros(n)
    strong = palette.tint(palette.YELLOW, 0.8).name()
    light = palette.tint(palette.YELLOW, 0.4).name()
    out: list[str] = []
    i = 0
    while i < n:
        j = i + 1
        key = (int(level[i]), bool(char[i]), tuple(sorted(tips[i])))
        while j < n and (int(level[j]), bool(char[j]), tuple(sorted(tips[j]))) == key:
            j += 1
        chunk = html.escape(text[i:j]).replace("\n", "<br>")
        lv, ch, tip = key
        if lv or ch:
            style = []
            if lv:
                style += [f"background-color:{strong if lv == 2 else light}", "font-weight:bold"]
            if ch:
                style.append("text-decoration:underline")
            title = html.escape("; ".join(tip), quote=True)
            chunk = f'<span style="{";".join(style)}" title="{title}">{chunk}</span>'
        out.append(chunk)
        i = j
    return "".join(out)


class LegendLabel(ElidedLabel):
    """One elided line whose tooltip is always the whole explanation."""

    explanation = ""

    def _sync_tooltip(self) -> None:
        self.setToolTip(self.explanation or (self.text() if self.is_elided() else ""))


class MarkedText(QTextBrowser):
    """Read-only, wrapped, selectable and scrollable text; a mark's tooltip names its terms."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("row_text")
        self.setOpenLinks(False)
        self.setReadOnly(True)
        self.setLineWrapMode(QTextBrowser.LineWrapMode.WidgetWidth)
        self.setTextInteractionFlags(
            Qt.TextInteractionFlag.TextSelectableByMouse
            | Qt.TextInteractionFlag.TextSelectableByKeyboard
        )
        self.marks: list[Mark] = []
        self.fields: list[tuple[str, str]] = []

    def show_fields(
        self, fields: Iterable[tuple[str, str]], terms: pd.DataFrame, towards: str = ""
    ) -> None:
        """Each (column, text) under its name, the terms of its column marked."""
        self.fields = [(str(c), str(t)) for c, t in fields]
        self.marks = []
        parts = []
        for column, text in self.fields:
            mine = terms[terms["column"] == column] if not terms.empty else terms
            marks = find_marks(text, mine)
            self.marks.extend(marks)
            parts.append(
                f'<p style="margin:0 0 2px 0; color:{palette.GREY}">{html.escape(column)}</p>'
                f'<p style="margin:0 0 8px 0">{marked_html(text, marks, towards)}</p>'
            )
        self.setHtml("".join(parts))

    def marked_terms(self) -> list[str]:
        """The distinct terms marked somewhere in the shown text."""
        return sorted({m.term for m in self.marks})

    def viewportEvent(self, event: QEvent) -> bool:
        if event.type() == QEvent.Type.ToolTip:
            pos = event.pos()  # type: ignore[attr-defined]
            tip = self.cursorForPosition(pos).charFormat().toolTip()
            if tip:
                QToolTip.showText(event.globalPos(), tip, self)  # type: ignore[attr-defined]
            else:
                QToolTip.hideText()
            return True
        return super().viewportEvent(event)


class ColumnValues(QScrollArea):
    """Column name and value pairs, one line each; a long value is elided, the whole in its
    tooltip, so no value makes the window wider."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("other_columns")
        self.setWidgetResizable(True)
        self.setFrameShape(QScrollArea.Shape.NoFrame)
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.values: dict[str, ElidedLabel] = {}
        self._body = QWidget()
        self._grid = QGridLayout(self._body)
        self._grid.setContentsMargins(0, 0, 0, 0)
        self._grid.setHorizontalSpacing(8)
        self._grid.setVerticalSpacing(1)
        self.setWidget(self._body)

    def show_values(self, pairs: Sequence[tuple[str, str, str]]) -> None:
        """(column, value, why the model leaves it out) triples, in table order."""
        names = [p[0] for p in pairs]
        if names != list(self.values):
            while self._grid.count():
                item = self._grid.takeAt(0)
                widget = None if item is None else item.widget()
                if widget is not None:
                    widget.deleteLater()
            self.values = {}
            for i, column in enumerate(names):
                name = ElidedLabel(column)
                name.setObjectName("hint")
                name.setMaximumWidth(160)
                value = ElidedLabel("")
                value.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
                self._grid.addWidget(name, i, 0)
                self._grid.addWidget(value, i, 1)
                self.values[column] = value
            self._grid.setColumnStretch(1, 1)
            self._grid.setRowStretch(len(pairs), 1)
        for column, text, _ in pairs:
            self.values[column].setText(text)


class ReadingPart(QWidget):
    """The row's text fields (marked) above the columns the model leaves out."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("reading_part")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        self.text_title = ElidedLabel("Text")
        self.text = MarkedText()
        # One line, so the text keeps the room; the whole explanation is in the tooltip.
        self.legend = LegendLabel("")
        self.legend.setObjectName("hint")
        self.other_title = ElidedLabel("Not used by the model")
        self.other = ColumnValues()
        self.explanation = ""
        lay.addWidget(self.text_title)
        lay.addWidget(self.text, 1)
        lay.addWidget(self.legend)
        lay.addWidget(self.other_title)
        lay.addWidget(self.other)

    def clear(self) -> None:
        self.show_row([], pd.DataFrame(), [])

    def show_row(
        self,
        fields: Sequence[tuple[str, str]],
        terms: pd.DataFrame,
        others: Sequence[tuple[str, str, str]],
    ) -> None:
        has_text = bool(fields)
        for w in (self.text_title, self.text, self.legend):
            w.setVisible(has_text)
        self.other_title.setVisible(bool(others))
        self.other.setVisible(bool(others))
        towards = str(terms.attrs.get("towards") or "")
        self.text.show_fields(fields, terms, towards)
        against = terms.attrs.get("against") or "the rest"
        if not has_text:
            short = full = ""
        elif terms.attrs.get("reason"):
            short = full = f"No terms marked: {terms.attrs['reason']}."
        elif not self.text.marks:
            short = full = (
                "No terms marked: nothing in this text pushed the linear model towards "
                f"{towards or 'its label'}."
            )
        else:
            short = SHORT.format(towards=towards, against=against)
            full = HOW.format(towards=towards, against=against)
        self.explanation = self.legend.explanation = full
        self.legend.setText(short)
        self.other.show_values(others)
        # As tall as its lines (up to six), so the text keeps the rest.
        line = self.other.fontMetrics().height() + 2
        self.other.setMaximumHeight(line * min(len(others), 6) + 4)
        self.other_title.setToolTip(
            "Columns the fit leaves out, shown for reading:\n"
            + "\n".join(f"{c}: {why}" for c, _, why in others if why)
        )
