"""Run a pure callable off the GUI thread and report back through queued signals.

The callable never sees Qt: it receives ``progress(fraction, message)`` and ``cancel``
(a threading.Event) as keyword arguments, so core functions can be passed as they are.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from typing import Any

from PySide6.QtCore import QObject, QThread, Signal

from reviewer.core.errors import ReviewerError
from reviewer.gui import collector

log = logging.getLogger(__name__)

#: At most this many progress signals per second reach the GUI thread.
PROGRESS_RATE_HZ = 20.0


class TaskBusyError(RuntimeError):
    """``TaskRunner.start`` was called while a task is still running."""


def one_line_message(exc: BaseException) -> str:
    """What a reviewer sees for a failure: our own messages as they are, others with type."""
    text = " ".join(str(exc).split())
    if isinstance(exc, ReviewerError):
        return text or type(exc).__name__
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


class _TaskThread(QThread):
    # Emitted from the worker thread; the runner lives in the GUI thread, so the
    # automatic connection queues them and its slots run on the GUI thread.
    progressed = Signal(float, str)
    succeeded = Signal(object)
    raised = Signal(str)
    stopped = Signal()

    def __init__(
        self,
        fn: Callable[..., Any],
        args: tuple[Any, ...],
        kwargs: dict[str, Any],
        cancel: threading.Event,
    ) -> None:
        super().__init__()
        self._fn = fn
        self._args = args
        self._kwargs = kwargs
        self._cancel = cancel
        self._last_emit = 0.0
        self.done = False  # set as the last act of run(); read by the reaper

    def _progress(self, fraction: float, message: str = "") -> None:
        now = time.monotonic()
        done = fraction >= 1.0
        if done or now - self._last_emit >= 1.0 / PROGRESS_RATE_HZ:
            self._last_emit = now
            self.progressed.emit(float(min(max(fraction, 0.0), 1.0)), str(message))

    def run(self) -> None:
        try:
            self._run()
        finally:
            self.done = True

    def _run(self) -> None:
        try:
            result = self._fn(
                *self._args, progress=self._progress, cancel=self._cancel, **self._kwargs
            )
        except BaseException as exc:
            if self._cancel.is_set():
                # A task that stops on cancel may do so by raising; that is not a failure.
                self.stopped.emit()
            else:
                log.error("background task failed", exc_info=exc)
                self.raised.emit(one_line_message(exc))
            return
        if self._cancel.is_set():
            self.stopped.emit()
        else:
            self.succeeded.emit(result)


class _Reaper(QObject):
    """Holds every worker thread until it has ended, independent of any runner's lifetime.

    A QThread object destroyed while its thread still runs aborts the process, and a runner
    may be dropped (a test ends, a dialog closes) a moment before its thread has ended.
    """

    def __init__(self) -> None:
        super().__init__()
        self.threads: set[_TaskThread] = set()

    def adopt(self, thread: _TaskThread) -> None:
        self.threads.add(thread)
        # Bound to this GUI-thread object, so the clean-up runs on the GUI thread.
        thread.finished.connect(self.reap)

    def reap(self) -> None:
        for thread in [t for t in self.threads if t.done]:
            # run() has returned, so this wait is at most a few microseconds.
            thread.wait()
            self.threads.discard(thread)
            thread.deleteLater()


_reaper: _Reaper | None = None


def _get_reaper() -> _Reaper:
    global _reaper
    if _reaper is None:
        _reaper = _Reaper()
    return _reaper


class TaskRunner(QObject):
    """Runs one task at a time on a QThread.

    ``start`` while a task is running raises TaskBusyError (no queue: the window should
    disable the action instead). Exactly one of finished / failed / cancelled follows each
    start, on the GUI thread; ``is_running`` is already False when it arrives, so a handler
    may start the next task. If ``cancel()`` was called, the outcome is ``cancelled`` even
    when the callable went on to return or raise.
    """

    progress = Signal(float, str)
    finished = Signal(object)
    failed = Signal(str)
    cancelled = Signal()

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._thread: _TaskThread | None = None
        self._cancel: threading.Event | None = None
        self._running = False

    @property
    def is_running(self) -> bool:
        return self._running

    def start(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> None:
        """Run ``fn(*args, progress=..., cancel=..., **kwargs)`` on a worker thread."""
        if self._running:
            raise TaskBusyError("a background task is already running; wait or cancel it first")
        cancel = threading.Event()
        thread = _TaskThread(fn, args, kwargs, cancel)
        thread.progressed.connect(self._on_progress)
        thread.succeeded.connect(self._on_succeeded)
        thread.raised.connect(self._on_raised)
        thread.stopped.connect(self._on_stopped)
        _get_reaper().adopt(thread)
        self._thread = thread
        self._cancel = cancel
        self._running = True
        # While the worker runs, Python's garbage collection stays on this (GUI) thread.
        self._collector = collector.instance()
        if self._collector is not None:
            self._collector.hold()
        thread.start()

    def cancel(self) -> None:
        """Ask the running task to stop; it sees ``cancel.is_set()`` and should return soon."""
        if self._running and self._cancel is not None:
            self._cancel.set()

    def wait(self, msecs: int = 5000) -> bool:
        """Block until the worker thread has ended (for shutdown); True if it did."""
        thread = self._thread
        if thread is None:
            return True
        try:
            return bool(thread.wait(msecs))
        except RuntimeError:  # already reaped and deleted: it has ended
            return True

    def shutdown(self, msecs: int = 5000) -> bool:
        """Cancel and wait: call from the window's closeEvent."""
        self.cancel()
        return self.wait(msecs)

    def _ended(self) -> None:
        self._running = False
        held, self._collector = getattr(self, "_collector", None), None
        if held is not None:
            held.release()

    def _current(self) -> bool:
        # Each thread sends exactly one outcome and its queued signals arrive in order, so
        # after the outcome nothing from that thread is still pending.
        return self._running

    def _on_progress(self, fraction: float, message: str) -> None:
        if self._current() and not (self._cancel and self._cancel.is_set()):
            self.progress.emit(fraction, message)

    def _on_succeeded(self, result: object) -> None:
        if self._current():
            self._ended()
            self.finished.emit(result)

    def _on_raised(self, message: str) -> None:
        if self._current():
            self._ended()
            self.failed.emit(message)

    def _on_stopped(self) -> None:
        if self._current():
            self._ended()
            self.cancelled.emit()
