"""A session file written by version 0.1 (``keep`` / ``kept`` / ``unreviewed``) still opens."""

from __future__ import annotations

import shutil
from pathlib import Path

from reviewer.core.review.session import ReviewSession
from reviewer.core.values import CONFIRM, REVIEW_NAMES

FIXTURES = Path(__file__).resolve().parent / "fixtures"


def test_a_version_01_session_replays_with_the_new_names(tmp_path: Path) -> None:
    # The fixture was written by 0.1: confirm rows 0-1 (then called keep), relabel row 2,
    # exclude row 3, keep row 4 and undo that, a note on row 5.
    data = tmp_path / "lots_v1.csv"
    shutil.copy(FIXTURES / "lots_v1.csv", data)
    session_file = tmp_path / "lots_v1.review.sqlite"
    shutil.copy(FIXTURES / "lots_v1_session.sqlite", session_file)
    # Read-only first, as `export` opens it: a 0.1 file (schema 1) reads without an upgrade.
    with ReviewSession.open(data, session_path=session_file, read_only=True) as s:
        assert [REVIEW_NAMES[c] for c in s.review[:2]] == ["confirmed", "confirmed"]
    with ReviewSession.open(data, session_path=session_file) as s:
        events = s.events()
        assert [e.action for e in events] == [
            CONFIRM, "relabel", "exclude", CONFIRM, "undo", "note",
        ]  # fmt: skip
        assert events[0].before == ("open", "open")
        assert events[0].after == ("confirmed", "confirmed")
        # The undo of the old keep carries state names too, renamed the same way.
        assert set(events[4].before) | set(events[4].after) <= set(REVIEW_NAMES)
        names = [REVIEW_NAMES[c] for c in s.review[:6]]
        assert names == ["confirmed", "confirmed", "relabelled", "excluded", "open", "open"]
        assert s.labels[2] == "exchange"
        # New edits append after the old ones and undo works across the boundary.
        s.confirm([4])
        assert REVIEW_NAMES[s.review[4]] == "confirmed"
        s.undo()
        assert REVIEW_NAMES[s.review[4]] == "open"
