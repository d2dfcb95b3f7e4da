"""Edit log: events, label state, undo/redo, replay, checked against a tiny reference model."""

from __future__ import annotations

import dataclasses
import json
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reviewer.core.errors import SessionError
from reviewer.core.review.editlog import Event, LabelState, utc_now
from reviewer.core.review.sessionfile import SessionFile
from reviewer.core.values import CONFIRMED, EXCLUDED, OPEN, REASONS, RELABELLED, REVIEW_NAMES

ROOT = Path(__file__).resolve().parents[3]
SOURCE = ["a", "b", None, "a", "c", "b"]


class Log:
    """Assigns seqs the way the session file does (or stores through one), keeps every event."""

    def __init__(self, state: LabelState, sf: SessionFile | None = None) -> None:
        self.state = state
        self.sf = sf
        self.events: list[Event] = []

    def add(self, event: Event) -> Event:
        if self.sf is not None:
            event = self.sf.append_event(event)
        else:
            event = dataclasses.replace(event, seq=len(self.events) + 1)
        self.state.apply(event)
        self.events.append(event)
        return event


class Reference:
    """The simplest model there is: a list of whole-table snapshots and a cursor."""

    def __init__(self, source: list) -> None:
        self.source = list(source)
        self.snaps = [(list(source), ["open"] * len(source))]
        self.pos = 0

    def edit(self, action: str, rows: list[int], label: object = None) -> None:
        labels, review = (list(x) for x in self.snaps[self.pos])
        for r in rows:
            if action == "confirm":
                review[r] = "confirmed"
            elif action == "relabel":
                labels[r], review[r] = label, "relabelled"
            elif action == "exclude":
                review[r] = "excluded"
            elif action == "restore" and review[r] == "excluded":
                review[r] = "relabelled" if labels[r] != self.source[r] else "open"
        self.snaps = [*self.snaps[: self.pos + 1], (labels, review)]
        self.pos += 1

    def undo(self) -> None:
        self.pos -= 1

    def redo(self) -> None:
        self.pos += 1

    def can_redo(self) -> bool:
        return self.pos < len(self.snaps) - 1

    def check(self, state: LabelState) -> None:
        labels, review = self.snaps[self.pos]
        assert state.labels.tolist() == labels
        assert [REVIEW_NAMES[c] for c in state.review.tolist()] == review
        assert state.excluded.tolist() == [s == "excluded" for s in review]
        assert state.can_undo == (self.pos > 0)
        assert state.can_redo == self.can_redo()


n_rows = len(SOURCE)
op = st.one_of(
    st.tuples(
        st.sampled_from(["confirm", "relabel", "exclude", "restore", "note"]),
        st.lists(st.integers(0, n_rows - 1), min_size=1, max_size=n_rows, unique=True),
        st.sampled_from(["a", "b", "c", "brand-new class"]),
    ),
    st.just(("undo",)),
    st.just(("redo",)),
)


def run_ops(ops: list, log: Log, ref: Reference) -> None:
    """Drive the label state and the reference model with the same ops, checking each step."""
    state = log.state
    for o in ops:
        if o[0] == "undo":
            if not state.can_undo:
                continue
            log.add(state.make_undo(reviewer="t"))
            ref.undo()
        elif o[0] == "redo":
            if not state.can_redo:
                continue
            log.add(state.make_redo(reviewer="t"))
            ref.redo()
        else:
            action, rows, label = o
            log.add(state.make_edit(action, rows, reviewer="t", label=label, reason=REASONS[0]))
            if action != "note":
                ref.edit(action, rows, label)
        ref.check(state)


@settings(max_examples=300, deadline=None)
@given(st.lists(op, max_size=40), st.lists(op, max_size=20))
def test_state_matches_snapshot_model_live_and_after_replay(first, second):
    ref = Reference(SOURCE)
    log = Log(LabelState(np.array(SOURCE, dtype=object)))
    run_ops(first, log, ref)

    replayed = LabelState.replay(np.array(SOURCE, dtype=object), log.events)
    ref.check(replayed)
    assert replayed.undo_target() == log.state.undo_target()
    assert replayed.redo_target() == log.state.redo_target()

    # Carry on from the replayed state: its undo must walk back through edits it
    # never applied one by one.
    log2 = Log(replayed)
    log2.events = list(log.events)
    run_ops(second, log2, ref)
    ref.check(LabelState.replay(np.array(SOURCE, dtype=object), log2.events))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(op, max_size=25))
def test_state_survives_the_session_file(ops):
    ref = Reference(SOURCE)
    state = LabelState(np.array(SOURCE, dtype=object))
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "s.mrs"
        with SessionFile.create(path, {"label_column": "y"}) as sf:
            log = Log(state, sf)
            run_ops(ops, log, ref)
        with SessionFile.open(path, read_only=True) as sf:
            stored = sf.events()
    assert stored == log.events
    ref.check(LabelState.replay(np.array(SOURCE, dtype=object), stored))


def fresh() -> Log:
    return Log(LabelState(np.array(SOURCE, dtype=object)))


def test_bulk_edit_is_one_undo_step():
    log = fresh()
    log.add(log.state.make_edit("relabel", [0, 1, 3, 5], reviewer="t", label="z"))
    assert log.state.labels.tolist() == ["z", "z", None, "z", "c", "z"]
    log.add(log.state.make_undo(reviewer="t"))
    assert log.state.labels.tolist() == SOURCE
    assert not log.state.can_undo


def test_new_edit_after_undo_drops_redo_but_log_keeps_everything():
    log = fresh()
    e1 = log.add(log.state.make_edit("exclude", [1], reviewer="t"))
    log.add(log.state.make_undo(reviewer="t"))
    assert log.state.redo_target() == e1.seq
    log.add(log.state.make_edit("confirm", [2], reviewer="t"))
    assert not log.state.can_redo
    assert [e.action for e in log.events] == ["exclude", "undo", "confirm"]
    assert log.state.excluded.tolist() == [False] * 6


def test_undo_and_redo_name_their_target_and_swap_values():
    log = fresh()
    e1 = log.add(log.state.make_edit("relabel", [0], reviewer="t", label="b"))
    undo = log.add(log.state.make_undo(reviewer="t", reason="slip of the key"))
    assert (undo.target, undo.before, undo.after) == (e1.seq, ("b",), ("a",))
    redo = log.add(log.state.make_redo(reviewer="t"))
    assert (redo.target, redo.before, redo.after) == (e1.seq, ("a",), ("b",))
    assert log.state.labels[0] == "b"


def test_notes_change_nothing_and_are_not_undo_steps():
    log = fresh()
    e1 = log.add(log.state.make_edit("exclude", [4], reviewer="t"))
    log.add(log.state.make_edit("note", [4], reviewer="t", note="ask the lab"))
    log.add(log.state.make_edit("note", [], reviewer="t", note="general remark"))
    assert log.state.undo_target() == e1.seq
    assert log.state.excluded[4]


def test_restore_leaves_relabelled_rows_relabelled_and_others_unreviewed():
    log = fresh()
    log.add(log.state.make_edit("relabel", [0], reviewer="t", label="new"))
    log.add(log.state.make_edit("exclude", [0, 1], reviewer="t"))
    ev = log.add(log.state.make_edit("restore", [0, 1, 2], reviewer="t"))
    assert ev.before == ("excluded", "excluded", "open")
    assert ev.after == ("relabelled", "open", "open")
    assert log.state.review[:3].tolist() == [RELABELLED, OPEN, OPEN]
    assert log.state.labels[0] == "new"


def test_relabel_and_keep_bring_an_excluded_row_back():
    log = fresh()
    log.add(log.state.make_edit("exclude", [0, 1], reviewer="t"))
    log.add(log.state.make_edit("confirm", [0], reviewer="t"))
    log.add(log.state.make_edit("relabel", [1], reviewer="t", label="c"))
    assert log.state.review[:2].tolist() == [CONFIRMED, RELABELLED]
    assert not log.state.excluded[:2].any()


def test_event_carries_time_reviewer_slack_zone_and_round_trips_through_json():
    state = LabelState(np.array(SOURCE, dtype=object))
    ev = state.make_edit(
        "relabel",
        [2, 4],
        reviewer="Dana",
        label=np.str_("b"),
        row_ids=["r-2", "r-4"],
        slack=[np.float64(1.7), None],
        zone=["wrong_side", None],
        reason=REASONS[0],
        note="checked the scan",
    )
    assert ev.before == (None, "c") and ev.after == ("b", "b")
    assert ev.time.endswith("Z") and ev.time[10] == "T" and len(ev.time) == 24
    back = Event.from_dict(json.loads(json.dumps(ev.to_dict())))
    assert back == ev
    assert type(back.slack[0]) is float


def test_utc_now_format():
    t = utc_now()
    assert len(t) == 24 and t[4] == "-" and t[19] == "." and t.endswith("Z")


@pytest.mark.parametrize(
    "bad",
    [
        dict(action="teleport", rows=(1,), row_ids=("1",), before=(1,), after=(1,),
             slack=(None,), zone=(None,)),
        dict(action="confirm", rows=(1, 2), row_ids=("1",), before=(1, 1), after=(1, 1),
             slack=(None, None), zone=(None, None)),
        dict(action="undo", rows=(), target=None),
        dict(action="confirm", rows=(), target=None),
    ],
)  # fmt: skip
def test_malformed_events_are_refused(bad):
    with pytest.raises(SessionError):
        Event(**bad)


def test_out_of_order_or_wrong_target_events_are_refused():
    log = fresh()
    e1 = log.add(log.state.make_edit("confirm", [0], reviewer="t"))
    with pytest.raises(SessionError, match="does not follow"):
        log.state.apply(dataclasses.replace(e1, seq=1))
    bad_undo = dataclasses.replace(log.state.make_undo(reviewer="t"), seq=2, target=7)
    with pytest.raises(SessionError, match="undoes seq 7"):
        log.state.apply(bad_undo)
    with pytest.raises(SessionError, match="undoes seq 7"):
        LabelState.replay(np.array(SOURCE, dtype=object), [e1, bad_undo])
    with pytest.raises(SessionError, match="nothing to redo"):
        log.state.make_redo(reviewer="t")


def test_rows_outside_the_table_and_duplicates_are_refused():
    state = LabelState(np.array(SOURCE, dtype=object))
    with pytest.raises(SessionError, match="row 6 is outside"):
        state.make_edit("confirm", [6], reviewer="t")
    with pytest.raises(SessionError, match="named twice"):
        state.make_edit("confirm", [1, 1], reviewer="t")
    with pytest.raises(SessionError, match="needs a label"):
        state.make_edit("relabel", [1], reviewer="t")


def test_returned_arrays_cannot_be_written_behind_the_log():
    state = LabelState(np.array(SOURCE, dtype=object))
    with pytest.raises(ValueError):
        state.labels[0] = "x"


def test_nan_source_labels_count_as_unlabelled():
    state = LabelState(np.array([1.0, float("nan"), 2.0], dtype=object))
    assert state.labels.tolist() == [1.0, None, 2.0]
    assert EXCLUDED == REVIEW_NAMES.index("excluded")


def test_benchmark_smoke_mode_writes_its_table(tmp_path):
    out = subprocess.run(
        [sys.executable, str(ROOT / "tests/benchmarks/replay.py"), "--smoke",
         "--out-dir", str(tmp_path)],
        capture_output=True, text=True, timeout=300, cwd=ROOT,
    )  # fmt: skip
    assert out.returncode == 0, out.stderr
    table = (tmp_path / "replay_smoke.md").read_text()
    assert "| replay" in table and "cores" in table
    data = json.loads((tmp_path / "replay_smoke.json").read_text())
    assert data["replay"]["events"] > 0 and data["replay"]["median_s"] > 0
    assert data["commit"]["median_ms"] > 0


def test_missing_markers_from_pandas_count_as_unlabelled():
    import pandas as pd

    state = LabelState(pd.Series(["x", pd.NA, None], dtype=object).to_numpy())
    assert state.labels.tolist() == ["x", None, None]
    ints = LabelState(np.array([3, 4], dtype=np.int64))
    assert type(ints.labels[0]) is int
