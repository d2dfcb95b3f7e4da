"""A second writer is refused however it reaches the session file, and a log that does not
replay in full still opens, read-only, with what replays."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from reviewer.core.errors import SessionLockedError
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import REVIEW_NAMES
from tests.hardening.test_concurrency import HOLDER, ROOT, _table


def _hold(data: Path, session_path: Path) -> subprocess.Popen[str]:
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(data), str(session_path)],
        cwd=ROOT,
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    assert holder.stdout is not None and holder.stdout.readline().strip() == "ready", (
        holder.stderr.read() if holder.stderr else ""
    )
    return holder


def _release(holder: subprocess.Popen[str]) -> None:
    assert holder.stdin is not None and holder.stdout is not None
    holder.stdin.write("\n")
    holder.stdin.flush()
    assert holder.stdout.readline().strip() == "closed"
    assert holder.wait(timeout=60) == 0


@pytest.mark.parametrize("how", ["symlink", "hardlink", "relative path", "old lock deleted"])
def test_a_second_writer_by_another_name_is_refused(tmp_path: Path, how: str) -> None:
    data = _table(tmp_path)
    session_path = tmp_path / "data.csv.review.sqlite"
    holder = _hold(data, session_path)
    try:
        other = tmp_path / "elsewhere"
        other.mkdir()
        if how == "symlink":
            second = other / "same.review.sqlite"
            second.symlink_to(session_path)
        elif how == "hardlink":
            second = other / "same.review.sqlite"
            os.link(session_path, second)
        elif how == "relative path":
            second = Path(os.path.relpath(session_path, Path.cwd()))
        else:  # the 0.1 writer lock was a side file: deleting it let a second writer in
            for p in tmp_path.glob("*.lock"):
                p.unlink()
            second = session_path
        with pytest.raises(SessionLockedError, match="open for writing elsewhere"):
            ReviewSession.open(data, label="label", session_path=second)
    finally:
        _release(holder)
    # A clean close leaves no lock file behind.
    assert not list(tmp_path.glob("*.lock"))
    with ReviewSession.open(data, session_path=session_path) as s:
        assert s.n_events == 1 and not s.read_only


def test_an_undo_of_an_older_edit_opens_read_only_and_exports_what_replays(
    tmp_path: Path,
) -> None:
    data = _table(tmp_path)
    session_path = tmp_path / "s.review.sqlite"
    with ReviewSession.open(data, label="label", session_path=session_path) as s:
        s.confirm([1])
        s.confirm([2])
        s.undo()  # seq 3 undoes seq 2
    # Make the log say what two writers could once leave: seq 3 undoes seq 1.
    conn = sqlite3.connect(session_path)
    conn.execute("UPDATE events SET target = 1 WHERE seq = 3")
    conn.commit()
    conn.close()
    with ReviewSession.open(data, session_path=session_path) as s:
        assert s.read_only
        assert any("event 3 undoes seq 1" in w for w in s.warnings)
        assert s.n_events == 2  # the two confirms replay; the bad undo does not
        assert [REVIEW_NAMES[c] for c in s.review[1:3]] == ["confirmed", "confirmed"]
        written = s.export(tmp_path / "clean.csv", audit=tmp_path / "audit.csv")
        assert all(p.exists() for p in written)
