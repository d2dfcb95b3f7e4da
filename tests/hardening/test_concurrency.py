"""Two processes on one session, and a fit cancelled half way."""

from __future__ import annotations

import subprocess
import sys
import textwrap
import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.core.errors import Cancelled, SessionError, SessionLockedError
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings

ROOT = Path(__file__).resolve().parents[2]

# The holder opens the session for writing, says so, and waits until told to quit.
HOLDER = textwrap.dedent(
    """
    import sys
    from reviewer.core.review.session import ReviewSession
    session = ReviewSession.open(sys.argv[1], label="label", session_path=sys.argv[2])
    session.confirm([0], reason="held by the first process")
    print("ready", flush=True)
    sys.stdin.readline()
    session.close()
    print("closed", flush=True)
    """
)


def _table(tmp_path: Path, n: int = 60) -> Path:
    rng = np.random.default_rng(0)
    frame = pd.DataFrame(
        {
            "x": np.r_[rng.normal(-1, 1, n // 2), rng.normal(1, 1, n - n // 2)],
            "z": rng.normal(size=n),
            "label": ["a"] * (n // 2) + ["b"] * (n - n // 2),
        }
    )
    path = tmp_path / "data.csv"
    frame.to_csv(path, index=False)
    return path


def test_second_writer_in_another_process_is_refused_and_a_reader_may_look(
    tmp_path: Path,
) -> None:
    data = _table(tmp_path)
    session_path = tmp_path / "review.session"
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(data), str(session_path)],
        cwd=ROOT,
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "ready", holder.stderr.read()
        with pytest.raises(SessionLockedError, match="open for writing elsewhere"):
            ReviewSession.open(data, label="label", session_path=session_path)
        with ReviewSession.open(data, session_path=session_path, read_only=True) as reader:
            assert reader.read_only
            # The reader sees what the writer committed.
            assert reader.n_events == 1
            with pytest.raises(SessionError, match="read-only"):
                reader.confirm([1])
        holder.stdin.write("\n")
        holder.stdin.flush()
        assert holder.stdout.readline().strip() == "closed"
        assert holder.wait(timeout=60) == 0
    finally:
        if holder.poll() is None:
            holder.kill()
            holder.wait()
    # Once the first process has gone, a writer is welcome again.
    with ReviewSession.open(data, label="label", session_path=session_path) as again:
        assert not again.read_only
        assert again.n_events == 1


def test_a_cancelled_fit_raises_and_leaves_the_latest_fit_untouched(tmp_path: Path) -> None:
    data = _table(tmp_path, 120)
    with ReviewSession.open(data, label="label", session_path=tmp_path / "s.session") as session:
        first = session.fit(FitSettings(kernel="linear", C=1.0, folds=3))
        before = first.rows.copy()
        session.relabel([0], "b", reason="test")
        job = session.prepare_fit(FitSettings(kernel="rbf", C=10.0, folds=5))
        cancel = threading.Event()
        seen: list[float] = []

        def progress(fraction: float, message: str) -> None:
            seen.append(fraction)
            if fraction >= 0.3:  # part-way through the held-out folds
                cancel.set()

        with pytest.raises(Cancelled, match="unchanged"):
            ReviewSession.compute_fit(job, progress, cancel)
        assert any(0 < f < 1 for f in seen) and max(seen) < 1.0
        assert session.latest is first
        pd.testing.assert_frame_equal(session.latest.rows, before)
