"""Small widgets the window's parts share: a label that elides instead of forcing width."""

from __future__ import annotations

from PySide6.QtCore import QSize, Qt
from PySide6.QtGui import QPainter, QResizeEvent
from PySide6.QtWidgets import QLabel, QSizePolicy, QWidget


class ElidedLabel(QLabel):
    """One line of plain text, cut with "…" when the space is short; the tooltip shows it all.

    Its minimum width is a few characters, so a long label never makes its window wider.
    """

    def __init__(self, text: str = "", parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._full = ""
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Preferred)
        self.setText(text)

    def setText(self, text: str) -> None:
        self._full = str(text)
        super().setText(self._full)
        self._sync_tooltip()
        self.updateGeometry()
        self.update()

    def text(self) -> str:
        """The whole text, not the elided one drawn."""
        return self._full

    def shown_text(self) -> str:
        """The text as drawn at the current width (elided when it does not fit)."""
        return self.fontMetrics().elidedText(
            self._full, Qt.TextElideMode.ElideRight, max(0, self.contentsRect().width())
        )

    def is_elided(self) -> bool:
        return self.shown_text() != self._full

    def _sync_tooltip(self) -> None:
        self.setToolTip(self._full if self.is_elided() else "")

    def minimumSizeHint(self) -> QSize:
        fm = self.fontMetrics()
        return QSize(fm.horizontalAdvance("M…") + 4, fm.height())

    def sizeHint(self) -> QSize:
        fm = self.fontMetrics()
        return QSize(fm.horizontalAdvance(self._full) + 6, fm.height())

    def resizeEvent(self, event: QResizeEvent) -> None:
        super().resizeEvent(event)
        self._sync_tooltip()

    def paintEvent(self, _event: object) -> None:
        painter = QPainter(self)
        painter.setPen(self.palette().color(self.foregroundRole()))
        painter.drawText(
            self.contentsRect(),
            int(self.alignment() | Qt.AlignmentFlag.AlignVCenter),
            self.shown_text(),
        )
        painter.end()
