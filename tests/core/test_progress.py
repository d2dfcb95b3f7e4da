"""Progress slices and cancellation shared by every long computation."""

from __future__ import annotations

import threading

import pytest

from reviewer.core.errors import Cancelled
from reviewer.core.progress import Reporter


def test_nested_slices_report_on_one_bar() -> None:
    seen: list[tuple[float, str]] = []
    report = Reporter(lambda f, m: seen.append((f, m)))
    fold = report.slice(0.5, 1.0).slice(0.5, 1.0)  # the last quarter of the bar
    fold(0.0, "start")
    fold(0.5, "half")
    fold(2.0, "past the end is clipped")
    assert [f for f, _ in seen] == pytest.approx([0.75, 0.875, 1.0])
    assert seen[1][1] == "half"


def test_a_set_cancel_event_stops_the_work_at_its_next_report() -> None:
    cancel = threading.Event()
    report = Reporter(None, cancel).slice(0.2, 0.4)
    report(0.5)  # not cancelled yet: nothing happens
    cancel.set()
    with pytest.raises(Cancelled, match="previous results are unchanged"):
        report(0.6)
