"""The edit log: every review action is an `Event`, and `LabelState` is what the events produce.

Pure Python and numpy; the SQLite file that stores the events is `sessionfile.py`.

Actions and what an event's per-row `before` / `after` hold:

- ``relabel``: the row's label before and after (``after`` may be a new class name).
- ``keep`` / ``exclude`` / ``restore``: the row's review state name before and after
  (one of ``REVIEW_NAMES``).
- ``note``: the row's current label in both (a note changes nothing; it may name no rows).
- ``undo`` / ``redo``: the rows of the target edit; ``undo`` holds the target's values
  swapped (after -> before), ``redo`` repeats them.

Every decision replaces the row's previous decision: ``keep`` confirms the current label
and brings an excluded row back, ``relabel`` sets a label (and brings the row back),
``exclude`` leaves the row out, ``restore`` brings an excluded row back and leaves it
``relabelled`` when its label differs from the source label, else ``open`` (back in
the queue: nobody has confirmed its label yet). ``restore`` does nothing to a row that is
not excluded. Notes are not undo steps; ``undo`` skips over them.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import itertools
from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from reviewer.core.errors import SessionError
from reviewer.core.plain import plain
from reviewer.core.values import (
    ACTIONS,
    CONFIRM,
    CONFIRMED,
    EDIT_ACTIONS,
    EXCLUDE,
    EXCLUDED,
    LEGACY_NAMES,
    NOTE,
    OPEN,
    REDO,
    RELABEL,
    RELABELLED,
    RESTORE,
    REVIEW_NAMES,
    UNDO,
)

# Per-entry action codes for the vectorised replay; keep/relabel/exclude equal their state.
_STATE_OF = {CONFIRM: CONFIRMED, RELABEL: RELABELLED, EXCLUDE: EXCLUDED}
_RESTORE_CODE = 4
_ACTION_CODE = {CONFIRM: CONFIRMED, RELABEL: RELABELLED, EXCLUDE: EXCLUDED, RESTORE: _RESTORE_CODE}


def utc_now() -> str:
    """The current time as ISO 8601 UTC with milliseconds, e.g. 2026-12-01T21:55:10.123Z."""
    now = _dt.datetime.now(_dt.timezone.utc)
    return now.strftime("%Y-%m-%dT%H:%M:%S.") + f"{now.microsecond // 1000:03d}Z"


@dataclass(frozen=True, kw_only=True, slots=True)
class Event:
    """One entry of the edit log. `seq` is 0 until the session file assigns it."""

    seq: int = 0
    time: str = ""
    reviewer: str = ""
    action: str
    rows: tuple[int, ...] = ()
    row_ids: tuple[str, ...] = ()
    before: tuple[Any, ...] = ()
    after: tuple[Any, ...] = ()
    slack: tuple[float | None, ...] = ()
    zone: tuple[str | None, ...] = ()
    reason: str = ""
    note: str = ""
    target: int | None = None

    def __post_init__(self) -> None:
        if self.action not in ACTIONS:
            raise SessionError(f"unknown action {self.action!r} in event {self.seq}")
        n = len(self.rows)
        for name in ("row_ids", "before", "after", "slack", "zone"):
            if len(getattr(self, name)) != n:
                raise SessionError(
                    f"event {self.seq} ({self.action}) names {n} rows but has "
                    f"{len(getattr(self, name))} values in {name!r}"
                )
        if (self.action in (UNDO, REDO)) != (self.target is not None):
            raise SessionError(f"event {self.seq}: only undo and redo name a target seq")
        if n == 0 and self.action in EDIT_ACTIONS:
            raise SessionError(f"event {self.seq} ({self.action}) names no rows")

    def to_dict(self) -> dict[str, Any]:
        """Plain dict with lists instead of tuples, ready for JSON."""
        d = asdict(self)
        for key in ("rows", "row_ids", "before", "after", "slack", "zone"):
            d[key] = list(d[key])
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Event:
        """Inverse of `to_dict`; unknown keys are refused."""
        try:
            return cls(
                seq=int(d.get("seq", 0)),
                time=str(d.get("time", "")),
                reviewer=str(d.get("reviewer", "")),
                action=d["action"],
                rows=tuple(int(r) for r in d.get("rows", ())),
                row_ids=tuple(str(r) for r in d.get("row_ids", ())),
                before=tuple(d.get("before", ())),
                after=tuple(d.get("after", ())),
                slack=tuple(d.get("slack", ())),
                zone=tuple(d.get("zone", ())),
                reason=str(d.get("reason", "")),
                note=str(d.get("note", "")),
                target=None if d.get("target") is None else int(d["target"]),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise SessionError(f"event {d.get('seq')!r} cannot be read: {exc}") from exc


def _object_array(values: Iterable[Any], n: int) -> np.ndarray:
    # Filling an empty object array keeps tuple-like labels from becoming a 2-D array.
    out = np.empty(n, dtype=object)
    out[:] = list(values)
    return out


def _last_positions(values: np.ndarray, n: int) -> np.ndarray:
    """Index of the last occurrence of each distinct value in 0..n-1 (no sort needed)."""
    last = np.full(n, -1, dtype=np.intp)
    # ufunc.at is unbuffered, so repeated values resolve to the largest index, unlike
    # plain fancy assignment whose order numpy does not promise.
    np.maximum.at(last, values, np.arange(values.size, dtype=np.intp))
    return last[last >= 0]


class LabelState:
    """Current labels, exclusions and review states: the source labels with the live edits.

    Undo reverts the most recent live edit, redo re-applies the most recently undone one,
    and a new edit after an undo drops the redo branch (the log keeps every event).
    Arrays handed out are read-only views; change the state only through `apply`.
    """

    def __init__(self, source_labels: Sequence[Any] | np.ndarray) -> None:
        arr = np.asarray(source_labels)
        if arr.ndim != 1:
            raise SessionError(f"source labels must be one column, got shape {arr.shape}")
        # tolist() turns numpy scalars into plain Python values in one C loop.
        src = arr if arr.dtype == object else _object_array(arr.tolist(), arr.size)
        if src is arr:
            src = arr.copy()
        try:
            src[src != src] = None  # NaN is the only value not equal to itself: unlabelled
        except (TypeError, ValueError):  # a value such as pandas' NA: go row by row
            src = _object_array(map(plain, src), src.size)
        self._source = src
        self._labels = self._source.copy()
        self._review = np.zeros(src.size, dtype=np.int8)
        # The live edits, and beside each its rows' prior (labels, review); None after a
        # bulk replay, in which case undoing it rebuilds from the remaining live edits.
        self._done: list[Event] = []
        self._snapshots: list[tuple[np.ndarray, np.ndarray, np.ndarray] | None] = []
        self._undone: list[Event] = []
        self._last_seq = 0
        self.inconsistency = ""
        """Why a lenient replay stopped early; empty when every event replayed."""

    # ---- read side -------------------------------------------------------------------
    @property
    def n_rows(self) -> int:
        return int(self._source.size)

    @property
    def source_labels(self) -> np.ndarray:
        return _readonly(self._source)

    @property
    def labels(self) -> np.ndarray:
        """Current label per row (object array, None for unlabelled)."""
        return _readonly(self._labels)

    @property
    def review(self) -> np.ndarray:
        """Review state code per row (int8): OPEN, CONFIRMED, RELABELLED or EXCLUDED."""
        return _readonly(self._review)

    @property
    def excluded(self) -> np.ndarray:
        """True where the row is left out of fitting and of the cleaned file."""
        return self._review == EXCLUDED

    @property
    def last_seq(self) -> int:
        return self._last_seq

    @property
    def can_undo(self) -> bool:
        return bool(self._done)

    @property
    def can_redo(self) -> bool:
        return bool(self._undone)

    def undo_target(self) -> int | None:
        """Seq of the edit an undo would revert now, or None."""
        return self._done[-1].seq if self._done else None

    def redo_target(self) -> int | None:
        """Seq of the edit a redo would re-apply now, or None."""
        return self._undone[-1].seq if self._undone else None

    def live_edits(self) -> list[Event]:
        """The edits that make up the current state, oldest first."""
        return list(self._done)

    # ---- building events -------------------------------------------------------------
    def make_edit(
        self,
        action: str,
        rows: Iterable[int],
        *,
        reviewer: str,
        label: Any = None,
        row_ids: Iterable[str] | None = None,
        slack: Iterable[float | None] | None = None,
        zone: Iterable[str | None] | None = None,
        reason: str = "",
        note: str = "",
        time: str | None = None,
    ) -> Event:
        """An unsaved event (seq 0) for keep/relabel/exclude/restore/note, with `before` and
        `after` filled from the current state. `row_ids` defaults to the row positions
        as text, `slack`/`zone` to None."""
        if action not in (*EDIT_ACTIONS, NOTE):
            raise SessionError(f"make_edit: {action!r} is not one of {(*EDIT_ACTIONS, NOTE)}")
        row_list = [int(r) for r in rows]
        if len(set(row_list)) != len(row_list):
            raise SessionError(f"{action}: a row is named twice in {row_list[:20]}")
        idx = self._check_rows(row_list, action)
        n = len(row_list)
        if action == RELABEL:
            label = plain(label)
            if label is None:
                raise SessionError("relabel needs a label; got none")
            before = tuple(plain(v) for v in self._labels[idx])
            after = (label,) * n
        elif action == NOTE:
            before = after = tuple(plain(v) for v in self._labels[idx])
        else:
            old = self._review[idx]
            before = tuple(REVIEW_NAMES[c] for c in old.tolist())
            after = tuple(REVIEW_NAMES[c] for c in self._next_review(action, idx, old).tolist())
        return Event(
            time=time or utc_now(),
            reviewer=reviewer,
            action=action,
            rows=tuple(row_list),
            row_ids=_per_row(row_ids, n, "row_ids", str) or tuple(str(r) for r in row_list),
            before=before,
            after=after,
            slack=_per_row(slack, n, "slack", _opt_float) or (None,) * n,
            zone=_per_row(zone, n, "zone", _opt_str) or (None,) * n,
            reason=reason,
            note=note,
        )

    def make_undo(self, *, reviewer: str, reason: str = "", time: str | None = None) -> Event:
        """An unsaved undo event for the most recent live edit."""
        if not self._done:
            raise SessionError("nothing to undo")
        return self._make_step(UNDO, self._done[-1], reviewer, reason, time)

    def make_redo(self, *, reviewer: str, reason: str = "", time: str | None = None) -> Event:
        """An unsaved redo event for the most recently undone edit."""
        if not self._undone:
            raise SessionError("nothing to redo")
        return self._make_step(REDO, self._undone[-1], reviewer, reason, time)

    def _make_step(self, action: str, tgt: Event, reviewer: str, reason: str, time: str | None):
        before, after = (tgt.after, tgt.before) if action == UNDO else (tgt.before, tgt.after)
        return Event(
            time=time or utc_now(),
            reviewer=reviewer,
            action=action,
            rows=tgt.rows,
            row_ids=tgt.row_ids,
            before=before,
            after=after,
            slack=tgt.slack,
            zone=tgt.zone,
            reason=reason,
            target=tgt.seq,
        )

    # ---- applying events -------------------------------------------------------------
    def apply(self, event: Event) -> None:
        """Apply one saved event (seq assigned, larger than any applied before)."""
        if event.seq <= self._last_seq:
            raise SessionError(f"event seq {event.seq} does not follow seq {self._last_seq}")
        action = event.action
        if action in EDIT_ACTIONS:
            snapshot = self._do(event)
            self._done.append(event)
            self._snapshots.append(snapshot)
            self._undone.clear()
        elif action == UNDO:
            if not self._done or self._done[-1].seq != event.target:
                raise SessionError(
                    f"event {event.seq} undoes seq {event.target}, but the edit to undo is "
                    f"{self.undo_target()}"
                )
            top, saved = self._done.pop(), self._snapshots.pop()
            if saved is None:
                self._labels, self._review = _final_state(self._source, self._done)
            else:
                idx, labels, review = saved
                self._labels[idx] = labels
                self._review[idx] = review
            self._undone.append(top)
        elif action == REDO:
            if not self._undone or self._undone[-1].seq != event.target:
                raise SessionError(
                    f"event {event.seq} redoes seq {event.target}, but the edit to redo is "
                    f"{self.redo_target()}"
                )
            top = self._undone.pop()
            self._snapshots.append(self._do(top))
            self._done.append(top)
        self._last_seq = event.seq

    @classmethod
    def replay(
        cls,
        source_labels: Sequence[Any] | np.ndarray,
        events: Iterable[Event],
        *,
        lenient: bool = False,
    ) -> LabelState:
        """Rebuild the state from the whole log (all events, in seq order).

        Undo/redo are resolved first to find the live edits; their combined effect is
        then computed with numpy in one pass instead of applying them one at a time.
        An event that does not fit the log before it (an undo of an edit that is not the
        latest, say) raises SessionError; with ``lenient`` the replay stops before it
        instead and says why in ``inconsistency``.
        """
        state = cls(source_labels)
        done: list[Event] = []
        undone: list[Event] = []
        last = 0
        for ev in events:
            problem = ""
            if ev.seq <= last:
                problem = f"event seq {ev.seq} does not follow seq {last}"
            elif ev.action == UNDO and (not done or done[-1].seq != ev.target):
                problem = f"event {ev.seq} undoes seq {ev.target}, not the latest edit"
            elif ev.action == REDO and (not undone or undone[-1].seq != ev.target):
                problem = f"event {ev.seq} redoes seq {ev.target}, not the last undo"
            if problem:
                if not lenient:
                    raise SessionError(problem)
                state.inconsistency = problem
                break
            last = ev.seq
            action = ev.action
            if action == UNDO:
                undone.append(done.pop())
            elif action == REDO:
                done.append(undone.pop())
            elif action != NOTE:
                done.append(ev)
                if undone:
                    undone = []
        state._labels, state._review = _final_state(state._source, done)
        state._done = done
        state._snapshots = [None] * len(done)
        state._undone = undone
        state._last_seq = last
        return state

    # ---- internals -------------------------------------------------------------------
    def _check_rows(self, rows: Sequence[int], action: str) -> np.ndarray:
        idx = np.asarray(rows, dtype=np.intp)
        if idx.size and (idx.min() < 0 or idx.max() >= self._source.size):
            bad = idx[(idx < 0) | (idx >= self._source.size)][0]
            raise SessionError(f"{action}: row {bad} is outside the table of {self.n_rows} rows")
        if idx.size == 0 and action in EDIT_ACTIONS:
            raise SessionError(f"{action}: no rows given")
        return idx

    def _next_review(self, action: str, idx: np.ndarray, old: np.ndarray) -> np.ndarray:
        if action != RESTORE:
            return np.full(idx.size, _STATE_OF[action], dtype=np.int8)
        back = np.where(self._labels[idx] != self._source[idx], RELABELLED, OPEN)
        return np.where(old == EXCLUDED, back, old).astype(np.int8)

    def _do(self, ev: Event) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        idx = self._check_rows(ev.rows, ev.action)
        snapshot = (idx, self._labels[idx], self._review[idx])
        if ev.action == RELABEL:
            self._labels[idx] = _object_array(ev.after, idx.size)
        self._review[idx] = self._next_review(ev.action, idx, snapshot[2])
        return snapshot


def _final_state(source: np.ndarray, edits: Sequence[Event]) -> tuple[np.ndarray, np.ndarray]:
    """Labels and review codes after applying `edits` in order to untouched source labels."""
    n = source.size
    labels = source.copy()
    review = np.zeros(n, dtype=np.int8)
    if not edits:
        return labels, review
    row_lists = [e.rows for e in edits]
    lengths = np.fromiter(map(len, row_lists), dtype=np.intp, count=len(edits))
    total = int(lengths.sum())
    rows = np.fromiter(itertools.chain.from_iterable(row_lists), dtype=np.intp, count=total)
    if rows.size and (rows.min() < 0 or rows.max() >= n):
        raise SessionError(f"an event names a row outside the table of {n} rows")
    codes = np.fromiter((_ACTION_CODE[e.action] for e in edits), dtype=np.int8, count=len(edits))
    act = np.repeat(codes, lengths)

    is_relabel = act == RELABELLED
    if is_relabel.any():
        values = _object_array(
            itertools.chain.from_iterable(e.after for e in edits if e.action == RELABEL),
            int(is_relabel.sum()),
        )
        rel_rows = rows[is_relabel]
        last = _last_positions(rel_rows, n)
        labels[rel_rows[last]] = values[last]

    # The last keep/relabel/exclude decides a row's state; a restore after it matters
    # only when that decision was exclude (otherwise the restore found nothing to bring back).
    decided = act != _RESTORE_CODE
    dec_rows, dec_act = rows[decided], act[decided]
    if dec_rows.size:
        last = _last_positions(dec_rows, n)
        review[dec_rows[last]] = dec_act[last]
    last_any = _last_positions(rows, n)
    restored = rows[last_any][act[last_any] == _RESTORE_CODE]
    restored = restored[review[restored] == EXCLUDED]
    if restored.size:
        changed = labels[restored] != source[restored]
        review[restored] = np.where(changed, RELABELLED, OPEN)
    return labels, review


def _readonly(arr: np.ndarray) -> np.ndarray:
    view = arr.view()
    view.flags.writeable = False
    return view


def _opt_float(v: Any) -> float | None:
    v = plain(v)
    return None if v is None else float(v)


def _opt_str(v: Any) -> str | None:
    v = plain(v)
    return None if v is None else str(v)


def _per_row(values: Iterable[Any] | None, n: int, name: str, conv: Any) -> tuple[Any, ...]:
    if values is None:
        return ()
    out = tuple(conv(v) for v in values)
    if len(out) != n:
        raise SessionError(f"{name} has {len(out)} values for {n} rows")
    return out


_STATE_ACTIONS = (CONFIRM, EXCLUDE, RESTORE)


def read_legacy_names(events: Sequence[Event]) -> list[Event]:
    """Events as this version names them: 0.1 files said ``kept`` and ``unreviewed``.

    (Their ``keep`` action is read as ``confirm`` where the file is read, before an Event
    exists.)

    Only review-state values are renamed (in confirm, exclude and restore events and in the
    undo or redo of one); labels are left alone, whatever text they hold.
    """
    kind: dict[int, str] = {}
    out: list[Event] = []
    for ev in events:
        what = kind.get(ev.target, "") if ev.target is not None else ev.action
        kind[ev.seq] = what
        if what in _STATE_ACTIONS:
            before = tuple(LEGACY_NAMES.get(v, v) if isinstance(v, str) else v for v in ev.before)
            after = tuple(LEGACY_NAMES.get(v, v) if isinstance(v, str) else v for v in ev.after)
        else:
            before, after = ev.before, ev.after
        if (before, after) != (ev.before, ev.after):
            ev = dataclasses.replace(ev, before=before, after=after)
        out.append(ev)
    return out
