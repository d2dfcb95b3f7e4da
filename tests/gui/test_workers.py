"""TaskRunner: results, progress, cancel and errors come back on the GUI thread."""

from __future__ import annotations

import threading
import time

import numpy as np
import pytest
from PySide6.QtCore import QElapsedTimer, QThread, QTimer
from PySide6.QtWidgets import QApplication

from reviewer.core.errors import InputError
from reviewer.gui.workers import TaskBusyError, TaskRunner


def add(a, b, *, scale=1, progress, cancel):
    return (a + b) * scale


def test_finished_delivers_the_result(qtbot):
    runner = TaskRunner()
    with qtbot.waitSignal(runner.finished, timeout=5000) as blocker:
        runner.start(add, 2, 3, scale=10)
    assert blocker.args == [50]
    assert not runner.is_running


def test_progress_arrives_on_the_gui_thread_in_order(qtbot):
    runner = TaskRunner()
    seen: list[tuple[float, str, bool]] = []
    gui_thread = QApplication.instance().thread()
    worker_threads: list[bool] = []

    def slow(*, progress, cancel):
        worker_threads.append(QThread.currentThread() is not gui_thread)
        for i in range(1, 6):
            time.sleep(0.06)  # slower than the throttle, so every step gets through
            progress(i / 5, f"step {i}")
        return "done"

    runner.progress.connect(lambda f, m: seen.append((f, m, QThread.currentThread() is gui_thread)))
    with qtbot.waitSignal(runner.finished, timeout=5000):
        runner.start(slow)
    assert worker_threads == [True]
    assert [s[1] for s in seen] == [f"step {i}" for i in range(1, 6)]
    assert [s[0] for s in seen] == pytest.approx([0.2, 0.4, 0.6, 0.8, 1.0])
    assert all(s[2] for s in seen)


def test_progress_is_throttled_but_the_last_step_gets_through(qtbot):
    runner = TaskRunner()
    seen: list[float] = []

    def chatty(*, progress, cancel):
        n = 20_000
        for i in range(1, n + 1):
            progress(i / n, "")
        return n

    runner.progress.connect(lambda f, m: seen.append(f))
    with qtbot.waitSignal(runner.finished, timeout=10_000):
        runner.start(chatty)
    assert seen[-1] == 1.0
    assert len(seen) < 1000  # 20,000 calls did not become 20,000 queued signals


def test_cancel_gives_cancelled_and_the_task_sees_the_event(qtbot):
    runner = TaskRunner()
    started = threading.Event()
    saw_cancel: list[bool] = []

    def waits(*, progress, cancel):
        started.set()
        saw_cancel.append(cancel.wait(10))
        return "should not be delivered"

    results: list[object] = []
    runner.finished.connect(results.append)
    runner.start(waits)
    assert started.wait(5)
    with qtbot.waitSignal(runner.cancelled, timeout=5000):
        runner.cancel()
    assert saw_cancel == [True]
    assert results == []
    assert not runner.is_running


def test_a_task_that_raises_on_cancel_counts_as_cancelled(qtbot):
    runner = TaskRunner()

    def stops(*, progress, cancel):
        cancel.wait(10)
        raise InputError("stopped part way")

    failures: list[str] = []
    runner.failed.connect(failures.append)
    runner.start(stops)
    with qtbot.waitSignal(runner.cancelled, timeout=5000):
        runner.cancel()
    assert failures == []


def test_our_error_message_is_passed_as_it_is(qtbot):
    runner = TaskRunner()

    def bad(*, progress, cancel):
        raise InputError("data.csv: column 'label' has only one class")

    with qtbot.waitSignal(runner.failed, timeout=5000) as blocker:
        runner.start(bad)
    assert blocker.args == ["data.csv: column 'label' has only one class"]


def test_other_exceptions_give_one_line_with_their_type(qtbot):
    runner = TaskRunner()

    def bad(*, progress, cancel):
        raise ValueError("first line\n  second line")

    with qtbot.waitSignal(runner.failed, timeout=5000) as blocker:
        runner.start(bad)
    assert blocker.args == ["ValueError: first line second line"]
    assert not runner.is_running


def test_starting_while_busy_is_refused_and_next_start_works(qtbot):
    runner = TaskRunner()
    release = threading.Event()

    def blocks(*, progress, cancel):
        release.wait(10)
        return 1

    runner.start(blocks)
    assert runner.is_running
    with pytest.raises(TaskBusyError, match="already running"):
        runner.start(add, 1, 2)
    with qtbot.waitSignal(runner.finished, timeout=5000):
        release.set()
    with qtbot.waitSignal(runner.finished, timeout=5000) as blocker:
        runner.start(add, 1, 2)
    assert blocker.args == [3]
    assert runner.wait(5000)


def test_gui_thread_keeps_ticking_during_a_long_task(qtbot):
    """Responsiveness check: a 50 ms timer keeps firing while a ~1.5 s task runs."""
    runner = TaskRunner()
    clock = QElapsedTimer()
    ticks: list[int] = []

    def crunch(*, progress, cancel):
        # Large numpy matrix products release the GIL, as a real fit mostly does.
        rng = np.random.default_rng(0)
        a = rng.random((400, 400))
        t0 = time.monotonic()
        steps = 0
        while time.monotonic() - t0 < 1.5 and not cancel.is_set():
            a = a @ a
            a /= np.abs(a).max()
            steps += 1
            progress(min((time.monotonic() - t0) / 1.5, 1.0), "crunching")
        return steps

    timer = QTimer()
    timer.setInterval(50)
    timer.timeout.connect(lambda: ticks.append(clock.elapsed()))
    clock.start()
    timer.start()
    with qtbot.waitSignal(runner.finished, timeout=20_000) as blocker:
        runner.start(crunch)
    timer.stop()
    assert blocker.args[0] > 0
    gaps = np.diff([0, *ticks])
    assert len(ticks) >= 10
    assert gaps.max() < 250, f"GUI thread stalled for {gaps.max()} ms"
