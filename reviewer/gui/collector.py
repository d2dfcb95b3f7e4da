"""Python's cyclic garbage collector, run on the GUI thread while work runs on a worker.

A collection runs on whichever thread happens to allocate when a threshold is crossed. If
that is a worker thread running a fit, and the garbage holds Qt objects (a closed window's
menus, say), their destructors run off the GUI thread and can deadlock with it: seen here,
the worker waiting in QObject's destructor for the interpreter lock while the GUI thread
held Qt's mutex deleting a widget. So while any background task runs, automatic
collection is off and a timer on the GUI thread does the same work the interpreter would
(generation 0 when its count passes the threshold, older generations when theirs do);
when the last task ends, automatic collection comes back.
"""

from __future__ import annotations

import gc

from PySide6.QtCore import QCoreApplication, QObject, QTimer

INTERVAL_MS = 250


class GuiThreadCollector(QObject):
    def __init__(self, parent: QObject, interval_ms: int = INTERVAL_MS) -> None:
        super().__init__(parent)
        self.holds = 0
        self.was_enabled = gc.isenabled()
        self.timer = QTimer(self)
        self.timer.setInterval(interval_ms)
        self.timer.timeout.connect(self.check)

    def hold(self) -> None:
        """A task starts on a worker: collect on this thread only, until it ends."""
        if self.holds == 0:
            self.was_enabled = gc.isenabled()
            gc.disable()
            self.timer.start()
        self.holds += 1

    def release(self) -> None:
        """A task ended."""
        if self.holds == 0:
            return
        self.holds -= 1
        if self.holds == 0:
            self.timer.stop()
            self.check()
            if self.was_enabled:
                gc.enable()

    def check(self) -> None:
        threshold, counts = gc.get_threshold(), gc.get_count()
        if counts[0] <= threshold[0]:
            return
        generation = 0
        if counts[1] > threshold[1]:
            generation = 2 if counts[2] > threshold[2] else 1
        gc.collect(generation)


_installed: list[GuiThreadCollector] = []


def instance() -> GuiThreadCollector | None:
    """The application's collector (made on first use, on the GUI thread)."""
    app = QCoreApplication.instance()
    if app is None:
        return None
    if not _installed or _installed[0].parent() is not app:
        _installed[:] = [GuiThreadCollector(app)]
    return _installed[0]
