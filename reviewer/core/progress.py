"""Progress reporting and cancellation shared by every long-running core function."""

from __future__ import annotations

import threading
from collections.abc import Callable

from reviewer.core.errors import Cancelled

ProgressFn = Callable[[float, str], None]


class Reporter:
    """Maps a sub-task onto a slice [start, end] of the caller's progress bar.

    Core functions take ``progress`` (fraction 0..1, message) and ``cancel`` (an Event);
    a Reporter passes both down so nested work reports on one bar and stops promptly.
    """

    def __init__(
        self,
        progress: ProgressFn | None = None,
        cancel: threading.Event | None = None,
        start: float = 0.0,
        end: float = 1.0,
    ) -> None:
        self._progress = progress
        self.cancel = cancel
        self.start = start
        self.end = end

    def __call__(self, fraction: float, message: str = "") -> None:
        self.check()
        if self._progress is not None:
            f = min(max(fraction, 0.0), 1.0)
            self._progress(self.start + (self.end - self.start) * f, message)

    def check(self) -> None:
        if self.cancel is not None and self.cancel.is_set():
            raise Cancelled("cancelled by the user; the previous results are unchanged")

    def slice(self, start: float, end: float) -> Reporter:
        span = self.end - self.start
        return Reporter(
            self._progress, self.cancel, self.start + span * start, self.start + span * end
        )
