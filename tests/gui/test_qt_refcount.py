"""Guard for the PySide6 pin: void Qt calls must not take references away from None.

PySide6 6.12.0 on CPython 3.11 drops one reference to None on every call of a Qt method
that returns nothing (found in this project: the review window's paint and update calls
drove None's count down until the interpreter aborted with "Fatal Python error:
none_dealloc" after a few thousand repaints). pyproject.toml therefore pins
PySide6-Essentials below 6.12; if that pin is lifted onto a broken release, this test
fails within seconds instead of the window dying mid-review.

On CPython 3.12+ None is immortal and its count never moves, so the test passes there
whatever the binding does; the interpreter cannot crash that way either.
"""

from __future__ import annotations

import sys

from PySide6.QtCore import QLineF, QPointF
from PySide6.QtGui import QImage, QPainter, QPen
from PySide6.QtWidgets import QWidget

CALLS = 10_000
# None's count moves a little with ordinary allocations; a broken binding moves it by
# several per loop pass (tens of thousands in total), far beyond this slack.
SLACK = 100


def test_void_painter_calls_keep_none_alive(qtbot):
    image = QImage(64, 64, QImage.Format.Format_ARGB32)
    painter = QPainter(image)
    pen = QPen()
    line = QLineF(QPointF(0, 0), QPointF(63, 63))
    try:
        before = sys.getrefcount(None)
        for i in range(CALLS):
            painter.translate(1.0, 1.0)
            painter.resetTransform()
            painter.setPen(pen)
            painter.drawLine(line)
            painter.save()
            painter.restore()
            image.setPixel(i % 64, 0, 0xFF000000)
        after = sys.getrefcount(None)
    finally:
        painter.end()
    assert after >= before - SLACK, f"None lost {before - after} references in {CALLS} passes"


def test_void_widget_calls_keep_none_alive(qtbot):
    widget = QWidget()
    qtbot.addWidget(widget)
    widget.resize(50, 50)
    before = sys.getrefcount(None)
    for _ in range(CALLS):
        widget.update()
        widget.setToolTip("")
        widget.setEnabled(True)
    after = sys.getrefcount(None)
    assert after >= before - SLACK, f"None lost {before - after} references in {CALLS} passes"
