"""Background work of the window: fits and opening a file run on a worker thread, with a
progress strip and a Cancel button that stay on screen while they run."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from PySide6.QtCore import QEventLoop, QObject, Signal
from PySide6.QtWidgets import QHBoxLayout, QProgressBar, QPushButton, QSizePolicy, QWidget

from reviewer.core.door import FitJob, ReviewSession
from reviewer.core.errors import ReviewerError
from reviewer.core.values import FitSettings
from reviewer.gui.widgets import ElidedLabel
from reviewer.gui.workers import TaskRunner


class TaskStrip(QWidget):
    """What runs, how far it got, and Cancel; one line, hidden while nothing runs."""

    cancel_clicked = Signal()

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("task_strip")
        lay = QHBoxLayout(self)
        lay.setContentsMargins(6, 2, 6, 2)
        self.text = ElidedLabel("")
        self.text.setObjectName("task_text")
        self.bar = QProgressBar()
        self.bar.setObjectName("task_progress")
        self.bar.setRange(0, 1000)
        self.bar.setTextVisible(False)
        self.bar.setMinimumWidth(80)
        self.bar.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setObjectName("cancel_fit")
        self.cancel_button.setToolTip("Stop this work; what was in place before stays (Esc)")
        self.cancel_button.clicked.connect(self.cancel_clicked)
        lay.addWidget(self.text, 2)
        lay.addWidget(self.bar, 3)
        lay.addWidget(self.cancel_button)
        self.hide()

    def begin(self, text: str, *, cancellable: bool = True) -> None:
        self.bar.setValue(0)
        self.text.setText(text)
        self.cancel_button.setVisible(cancellable)
        self.cancel_button.setEnabled(cancellable)
        self.show()

    def set_progress(self, fraction: float, message: str = "") -> None:
        self.bar.setValue(int(fraction * 1000))
        if message:
            self.text.setText(message)

    def end(self) -> None:
        self.bar.setValue(0)
        self.hide()


class FitTasks(QObject):
    """Fits one session at a time off the GUI thread and applies the result on it.

    Signals: ``state_changed()`` when a fit starts or ends; ``message(str)`` for the status
    line; ``failed(str)`` for an error the reviewer must see.
    """

    state_changed = Signal()
    message = Signal(str)
    failed = Signal(str)

    def __init__(self, strip: TaskStrip, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.strip = strip
        self.runner = TaskRunner(self)
        self.runner.progress.connect(strip.set_progress)
        self.runner.finished.connect(self._finished)
        self.runner.failed.connect(self._failed)
        self.runner.cancelled.connect(self._cancelled)
        strip.cancel_clicked.connect(self.cancel)
        self._job: FitJob | None = None
        self._session: ReviewSession | None = None

    @property
    def is_running(self) -> bool:
        return self.runner.is_running

    def start(self, session: ReviewSession, settings: FitSettings) -> bool:
        """Start fitting ``session``'s current labels; False while a fit already runs.
        Raises ReviewerError for settings the session refuses."""
        if self.runner.is_running:
            return False
        if settings != session.settings:
            session.set_settings(settings)
        self._job = session.prepare_fit(settings)
        self._session = session
        self.runner.start(ReviewSession.compute_fit, self._job)
        self.strip.begin("fitting…")
        self.state_changed.emit()
        return True

    def cancel(self) -> None:
        if self.runner.is_running:
            self.strip.text.setText("cancelling…")
            self.runner.cancel()

    def shutdown(self) -> None:
        self.runner.shutdown()

    def _end(self) -> tuple[FitJob | None, ReviewSession | None]:
        job, session = self._job, self._session
        self._job = self._session = None
        self.strip.end()
        return job, session

    def _finished(self, result: object) -> None:
        job, session = self._end()
        if session is not None and job is not None:
            session.apply_fit(job, result)  # type: ignore[arg-type]
            self.message.emit("Fit finished.")
        self.state_changed.emit()

    def _failed(self, message: str) -> None:
        self._end()
        self.state_changed.emit()
        self.failed.emit(f"The fit failed: {message}")

    def _cancelled(self) -> None:
        self._end()
        self.state_changed.emit()
        self.message.emit("Fit cancelled; the previous fit stays.")


def run_on_worker(strip: TaskStrip, text: str, job: Any, *, cancellable: bool = True) -> Any:
    """Run ``job(progress=..., cancel=...)`` on a worker while the window keeps painting;
    return its result. A ReviewerError it raises is raised here, whole (its type decides
    what the window asks next); other failures become a ReviewerError with one line."""
    runner = TaskRunner(strip)
    loop = QEventLoop()
    outcome: dict[str, Any] = {}

    def wrapped(progress: Any, cancel: Any) -> tuple[str, Any]:
        try:
            return "ok", job(progress=progress, cancel=cancel)
        except ReviewerError as exc:
            return "error", exc

    def finish(kind: str, value: Any) -> None:
        outcome[kind] = value
        loop.quit()

    runner.progress.connect(strip.set_progress)
    runner.finished.connect(lambda result: finish(*result))
    runner.failed.connect(lambda message: finish("failed", message))
    runner.cancelled.connect(lambda: finish("failed", f"{text.rstrip('…')} was cancelled"))
    strip.begin(text, cancellable=cancellable)
    cancel = strip.cancel_clicked.connect(runner.cancel)
    try:
        runner.start(wrapped)
        if runner.is_running:
            loop.exec()
    finally:
        strip.cancel_clicked.disconnect(cancel)
        strip.end()
    if "ok" in outcome:
        return outcome["ok"]
    if "error" in outcome:
        raise outcome["error"]
    raise ReviewerError(str(outcome.get("failed", "the work did not finish")))


def open_on_worker(strip: TaskStrip, path: Path, **kwargs: Any) -> ReviewSession:
    """Load the file and open its session on a worker thread. The session file's connection
    is shared across threads under its own lock, so the session may be built off the GUI
    thread."""

    def job(progress: Any, cancel: Any) -> ReviewSession:
        session = ReviewSession.open(path, progress=progress, cancel=cancel, **kwargs)
        # The projection and the class norms here, not in the first paint.
        session.prepare_views()
        return session

    try:
        return run_on_worker(strip, f"opening {Path(path).name}…", job)
    except ReviewerError as exc:
        if type(exc) is ReviewerError:  # a failure that was not ours: name the file
            raise ReviewerError(f"{path}: {exc}") from None
        raise


def preview_on_worker(strip: TaskStrip, path: Path, sheet: str | None = None) -> Any:
    """The column-roles preview of ``path`` (of ``sheet``, for a workbook), read on a worker."""

    def job(progress: Any, cancel: Any) -> Any:
        return ReviewSession.preview(path, sheet=sheet, progress=progress)

    return run_on_worker(strip, f"reading {Path(path).name}…", job, cancellable=False)


SessionPath = str | os.PathLike[str] | None
