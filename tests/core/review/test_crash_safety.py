"""Kill -9 a process that is writing edits: everything it was told is saved must be there."""

from __future__ import annotations

import random
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest

from reviewer.core.review.editlog import LabelState
from reviewer.core.review.sessionfile import SessionFile

ROOT = Path(__file__).resolve().parents[3]
N_ROWS = 50

# The child derives each event's content from the seq it will get, so the parent can
# tell a whole event from a mixed or half-written one. It prints a seq only after
# append_event has returned, i.e. after the commit: that is what the window would show.
WRITER = textwrap.dedent(
    """
    import sys
    sys.path.insert(0, sys.argv[2])
    import pandas as pd
    from reviewer.core.review.editlog import Event
    from reviewer.core.review.sessionfile import SessionFile

    sf = SessionFile.open(sys.argv[1])
    seq = sf.last_seq()
    print("ready", flush=True)
    while True:
        seq += 1
        rows = tuple(sorted({seq % 50, (seq * 7) % 50, (seq * 13) % 50}))[: 1 + seq % 3]
        ev = Event(
            action="relabel", reviewer="child", rows=rows, row_ids=tuple(map(str, rows)),
            before=("a",) * len(rows), after=(f"c{seq % 4}",) * len(rows),
            slack=(seq / 10,) * len(rows), zone=("wrong_side",) * len(rows),
            reason="label looks wrong", note=f"n{seq}",
        )
        saved = sf.append_event(ev)
        assert saved.seq == seq
        print(seq, flush=True)
        if seq % 15 == 0:
            sf.save_fit("latest", {"seq": seq}, {"seq": seq},
                        pd.DataFrame({"slack": [seq / 10] * 2000}))
    """
)


def expected(seq: int) -> tuple[tuple[int, ...], str]:
    rows = tuple(sorted({seq % 50, (seq * 7) % 50, (seq * 13) % 50}))[: 1 + seq % 3]
    return rows, f"c{seq % 4}"


def check_file(path: Path, reported: set[int]) -> int:
    with sqlite3.connect(path) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    conn.close()
    with SessionFile.open(path) as sf:
        events = sf.events()
        seqs = [e.seq for e in events]
        assert seqs == list(range(1, len(seqs) + 1)), "a gap or a repeat in the log"
        assert reported <= set(seqs), f"acknowledged edits lost: {sorted(reported - set(seqs))}"
        for ev in events:
            rows, label = expected(ev.seq)
            assert (ev.rows, ev.after, ev.note) == (rows, (label,) * len(rows), f"n{ev.seq}")
        fit = sf.load_fit("latest")
        if fit is not None:
            assert fit.settings == fit.summary and len(fit.rows) == 2000
            assert (fit.rows["slack"] == fit.settings["seq"] / 10).all()
    state = LabelState.replay(np.array(["a"] * N_ROWS, dtype=object), events)
    assert state.last_seq == len(events)
    return len(events)


@pytest.mark.slow
def test_kill_minus_nine_loses_no_acknowledged_edit(tmp_path):
    path = tmp_path / "crash.mrs"
    SessionFile.create(path, {"label_column": "y"}).close()
    rng = random.Random(20261201)
    reported: set[int] = set()
    deadline = time.monotonic() + 120  # keeps the test bounded on a slow machine
    rounds = 0
    while rounds < 30 and time.monotonic() < deadline:
        child = subprocess.Popen(
            [sys.executable, "-c", WRITER, str(path), str(ROOT)],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        assert child.stdout.readline().strip() == "ready", child.stderr.read()
        time.sleep(rng.uniform(0.0, 0.25))
        child.send_signal(signal.SIGKILL)
        out, _ = child.communicate()
        assert child.returncode == -signal.SIGKILL
        # A line cut off by the kill was never fully reported, so only whole lines count.
        lines = out.split("\n")[:-1]
        reported |= {int(x) for x in lines}
        total = check_file(path, reported)
        rounds += 1
    assert rounds >= 10
    assert total >= len(reported) > rounds  # the children did write between kills
