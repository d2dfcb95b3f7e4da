"""Garbage collection stays on the GUI thread while work runs on a worker."""

from __future__ import annotations

import gc
import threading

from reviewer.gui import collector
from reviewer.gui.workers import TaskRunner


class _Cycle:
    def __init__(self) -> None:
        self.me = self
        self.thread = ""

    def __del__(self) -> None:
        _Cycle.freed_on.append(threading.current_thread().name)


_Cycle.freed_on = []  # type: ignore[attr-defined]


def test_cycles_made_on_a_worker_are_freed_on_the_gui_thread(qtbot) -> None:
    runner = TaskRunner()
    seen_enabled = []

    def make_garbage(progress, cancel) -> int:
        seen_enabled.append(gc.isenabled())  # the interpreter does not collect here
        for _ in range(5000):
            _Cycle()  # each one is garbage in a reference cycle
        return 1

    with qtbot.waitSignal(runner.finished, timeout=30_000):
        runner.start(make_garbage)
    qtbot.waitUntil(lambda: len(_Cycle.freed_on) >= 5000, timeout=10_000)
    assert seen_enabled == [False]
    assert set(_Cycle.freed_on) == {threading.main_thread().name}
    assert gc.isenabled()  # back on once no task runs
    assert collector.instance() is collector.instance()  # one per application
