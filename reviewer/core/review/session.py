"""ReviewSession: the one object through which the window and the command line review a table.

It owns the loaded table, the column roles, the fit settings, the edit log (kept in a
SQLite session file, one commit per action) and the fits. Opening lives in `opening.py`,
the fits in `fits.py`, the hand-over (export) in `handover.py`; the methods here are the
session's whole surface.
"""

from __future__ import annotations

import dataclasses
import os
import threading
from collections.abc import Callable, Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from reviewer.core import values
from reviewer.core.data.dataset import Dataset
from reviewer.core.errors import InputError, SessionError
from reviewer.core.model.fitting import FitResult
from reviewer.core.progress import ProgressFn
from reviewer.core.review import fits, handover, opening
from reviewer.core.review.compare import Comparison, compare_fits
from reviewer.core.review.context import (
    ClassNorms,
    class_norms,
    feature_profile,
    nearest_neighbours,
    projection_2d,
)
from reviewer.core.review.editlog import Event, LabelState
from reviewer.core.review.explain import empty_contributions, term_contributions
from reviewer.core.review.fits import FitJob, FitPair
from reviewer.core.review.handover import export_session
from reviewer.core.review.opening import (
    APP_NAME,
    SESSION_SUFFIX,
    TablePreview,
    default_reviewer,
    default_session_path,
)
from reviewer.core.review.sessionfile import SessionFile
from reviewer.core.values import FitSettings

__all__ = [
    "APP_NAME",
    "SESSION_SUFFIX",
    "FitJob",
    "ReviewSession",
    "TablePreview",
    "default_reviewer",
    "default_session_path",
    "export_session",
]

Listener = Callable[[str, Any], None]
Rows = int | Iterable[int]
"""Row positions: one int, or several (lists, numpy arrays)."""


class ReviewSession:
    """One reviewed data set. Open it with :meth:`open`; close it when done."""

    def __init__(
        self,
        dataset: Dataset,
        file: SessionFile,
        reviewer: str,
        settings: FitSettings,
        warnings: list[str],
    ) -> None:
        self.loaded = dataset.loaded
        self.roles = dataset.roles
        self.file = file
        self.reviewer = reviewer
        self.settings = settings
        # Where fits run (held-out folds): cores on this machine, or a Dask scheduler
        # address. Not saved with the session and not a setting: results do not depend on it.
        self.jobs: int | None = None
        self.cluster: str | None = None
        self.X = dataset.X
        self.feature_names = dataset.feature_names
        self.fold_features = dataset.fold_features
        """None without a text column; else rebuilds a held-out fold's features."""
        self.vectors_path = dataset.vectors_path
        self.warnings = warnings
        self.ids = dataset.ids
        self.source_labels = dataset.labels
        events = file.events()
        self._by_id = self.roles.id is not None
        self._where = {str(v): i for i, v in enumerate(self.ids)} if self._by_id else {}
        # Ids the log names that the table no longer has become "ghost" rows after the
        # table, so every event (and every undo of it) still replays; they are never shown.
        ghosts = (
            sorted({rid for e in events for rid in e.row_ids} - set(self._where))
            if self._by_id
            else []
        )
        for j, rid in enumerate(ghosts):
            self._where[rid] = len(self.ids) + j
        if ghosts:
            warnings.append(
                f"{len(ghosts)} row(s) named in the log no longer exist in the data: "
                + ", ".join(ghosts[:10])
                + (" ..." if len(ghosts) > 10 else "")
            )
        self._state = LabelState.replay(
            np.concatenate([self.source_labels, np.full(len(ghosts), None, dtype=object)]),
            [self._to_current(e) for e in events],
            lenient=True,
        )
        if self._state.inconsistency:
            # A log that does not replay in full must still open: show what replays, read
            # only, so nothing is written on top of it and the reviewer can export.
            kept = self._state.last_seq
            events = [e for e in events if e.seq <= kept]
            file.demote(
                f"the edit log is inconsistent ({self._state.inconsistency}); opened read-only "
                f"with the {len(events)} events before it"
            )
            warnings.append(file.read_only_reason)
        self._events: list[Event] = []
        self._by_row: dict[int, list[int]] = {}
        for e in events:
            self._remember(e)
        self._listeners: list[Listener] = []
        self.latest: FitResult | None = None
        self.baseline: FitResult | None = None
        self.latest_seq: int | None = None
        self.edits_fit: FitResult | None = None
        """The edited labels fitted with the baseline's settings, when the latest fit used
        other settings (else the latest fit is that fit, and this is None)."""
        self._norms: ClassNorms | None = None
        self._projection: tuple[np.ndarray, np.ndarray] | None = None
        self.warnings.extend(fits.load_saved_fits(self))
        warning = values.formula_warning(self.source_labels, "labels in the data")
        if warning:
            self.warnings.append(warning)
        self._warned_formula = warning is not None

    # ---- opening ---------------------------------------------------------------------------
    @staticmethod
    def preview(
        data_path: str | os.PathLike[str],
        *,
        rows: int = 20,
        sheet: str | None = None,
        progress: ProgressFn | None = None,
    ) -> TablePreview:
        """Read the leading rows of a file (of ``sheet``, for a workbook) and guess its roles,
        for the column-roles dialog (safe on a worker thread)."""
        return opening.preview_table(data_path, rows=rows, sheet=sheet, progress=progress)

    @classmethod
    def open(
        cls,
        data_path: str | os.PathLike[str],
        *,
        label: str | None = None,
        id_column: str | None = None,
        session_path: str | os.PathLike[str] | None = None,
        overrides: Mapping[str, str] | None = None,
        reviewer: str | None = None,
        read_only: bool = False,
        reattach: bool = False,
        sheet: str | None = None,
        vectors: str | os.PathLike[str] | None = None,
        progress: ProgressFn | None = None,
        cancel: threading.Event | None = None,
    ) -> ReviewSession:
        """Open (or start) the review of ``data_path``.

        An existing session file resumes where the reviewer left off, with its remembered
        roles. If the data file changed since the session began, SourceChangedError is
        raised unless ``read_only`` (look only) or ``reattach`` (match rows by the id
        column; rows that no longer exist are reported in ``warnings``).

        ``vectors`` is a ``.npy`` file of shape (rows, d) matched to the table by row
        order; the session remembers its path and SHA-256, reloads it on resume and
        refuses (SourceChangedError) if the file changed.
        """
        return opening.open_session(
            cls,
            data_path,
            label=label,
            id_column=id_column,
            session_path=session_path,
            overrides=overrides,
            reviewer=reviewer,
            read_only=read_only,
            reattach=reattach,
            sheet=sheet,
            vectors=vectors,
            progress=progress,
            cancel=cancel,
        )

    def close(self) -> None:
        self.file.close()

    def __enter__(self) -> ReviewSession:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ---- listeners ---------------------------------------------------------------------------
    def subscribe(self, listener: Listener) -> None:
        """``listener(kind, payload)`` is called after "edited", "fitted" and "settings" changes,
        and with "warning" (a message) when a new label would run as a spreadsheet formula."""
        self._listeners.append(listener)

    def _announce(self, kind: str, payload: Any = None) -> None:
        for listener in list(self._listeners):
            listener(kind, payload)

    # ---- state -------------------------------------------------------------------------------
    @property
    def n_rows(self) -> int:
        return len(self.loaded.frame)

    @property
    def frame(self) -> pd.DataFrame:
        return self.loaded.frame

    @property
    def read_only(self) -> bool:
        return self.file.read_only

    @property
    def session_path(self) -> Path:
        return Path(self.file.path)

    @property
    def labels(self) -> np.ndarray:
        return self._state.labels[: self.n_rows]

    @property
    def excluded(self) -> np.ndarray:
        return self._state.excluded[: self.n_rows]

    @property
    def review(self) -> np.ndarray:
        """int8 review codes per row, names in values.REVIEW_NAMES."""
        return self._state.review[: self.n_rows]

    @property
    def classes(self) -> list[str]:
        """Every class in the current labels (including new ones a reviewer introduced)."""
        labels = pd.Series(self.labels, dtype=object)
        present = {str(v) for v in pd.unique(labels[labels.notna()])}
        if self.latest is not None:
            present |= set(self.latest.classes)
        return sorted(present)

    @property
    def can_undo(self) -> bool:
        return self._state.can_undo

    @property
    def can_redo(self) -> bool:
        return self._state.can_redo

    @property
    def n_events(self) -> int:
        return self._state.last_seq

    @property
    def fit_is_current(self) -> bool:
        """False once an edit was made after the latest fit."""
        return self.latest is not None and self.latest_seq == self._state.last_seq

    def events(self) -> list[Event]:
        """Every event in the log, oldest first (kept in memory; the file is the record)."""
        return list(self._events)

    def row_history(self, row: int) -> list[Event]:
        """Every event (undo and redo included) that names ``row``."""
        return [self._events[i] for i in self._by_row.get(row, [])]

    def _remember(self, event: Event) -> None:
        self._events.append(event)
        for r in self._to_current(event).rows:
            self._by_row.setdefault(r, []).append(len(self._events) - 1)

    def review_counts(self) -> dict[str, int]:
        codes = np.bincount(self.review.astype(np.int64), minlength=len(values.REVIEW_NAMES))
        return {name: int(codes[i]) for i, name in enumerate(values.REVIEW_NAMES)}

    def status(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "rows": self.n_rows,
            "events": self.n_events,
            "reviewed": int(np.sum(self.review != values.OPEN)),
            "session_file": str(self.session_path),
            "saved": True,  # every acknowledged edit is committed before the call returns
            "read_only": self.read_only,
            "fit_is_current": self.fit_is_current,
        }
        if self.latest is not None:
            out["zones"] = dict(self.latest.summary.zone_counts)
        return out

    # ---- edits -------------------------------------------------------------------------------
    # ``rows`` are 0-based row positions in the table (one int or several); `rows_of` turns
    # id values into positions. Each call is one step in the log and one undo.
    def rows_of(self, ids: Iterable[object] | str) -> list[int]:
        """Row positions of the given id values (as text, the way the id column reads)."""
        wanted = [ids] if isinstance(ids, str) else list(ids)
        where = {str(v): i for i, v in enumerate(self.ids)}
        missing = [str(v) for v in wanted if str(v) not in where]
        if missing:
            raise InputError(f"argument 'ids': no row has id {', '.join(missing[:5])}")
        return [where[str(v)] for v in wanted]

    def ranking(self) -> pd.DataFrame:
        """The latest fit as the scan table: row_id, label (current), model_label, margin,
        slack, held-out values, alpha, zone, support, score, rank; one row per table row."""
        if self.latest is None:
            raise SessionError("no fit yet: fit first to get a ranking")
        from reviewer.core.model.scan import scan_frame

        return scan_frame(self.latest, self.labels, self.ids)

    def confirm(self, rows: Rows, *, reason: str = "", note: str = "") -> Event:
        """The rows' current labels are right."""
        return self._edit(values.CONFIRM, rows, reason=reason, note=note)

    def relabel(self, rows: Rows, label: str, *, reason: str = "", note: str = "") -> Event:
        """Give the rows ``label`` (a class of the table or a new one). Rows that already
        have it are left out; if every row has it, SessionError says to confirm instead."""
        label = str(label).strip()
        if not label:
            raise SessionError("a new label cannot be empty")
        positions = self._positions(values.RELABEL, rows)
        changing = [r for r in positions if self.labels[r] != label]
        if positions and not changing:
            raise SessionError(
                f"relabel: the selected row(s) already have label {label!r}; confirm them instead"
            )
        if not self._warned_formula and values.looks_like_formula(label):
            self._warned_formula = True
            self._announce("warning", values.formula_warning([label], "new labels"))
        return self._edit(values.RELABEL, changing, label=label, reason=reason, note=note)

    def exclude(self, rows: Rows, *, reason: str = "", note: str = "") -> Event:
        """Leave the rows out of the fits and of the cleaned file."""
        return self._edit(values.EXCLUDE, rows, reason=reason, note=note)

    def restore(self, rows: Rows, *, reason: str = "", note: str = "") -> Event:
        """Bring excluded rows back."""
        return self._edit(values.RESTORE, rows, reason=reason, note=note)

    def add_note(self, rows: Rows, text: str) -> Event:
        """A note on the rows (changes nothing; not an undo step)."""
        return self._edit(values.NOTE, rows, note=text)

    def _positions(self, action: str, rows: Rows) -> list[int]:
        """``rows`` as sorted distinct positions; our error for anything that is not one."""
        items = [rows] if isinstance(rows, (int, np.integer)) else rows
        if isinstance(items, (str, bytes)) or not isinstance(items, Iterable):
            raise SessionError(
                f"{action}: argument 'rows' must be row positions (ints), got {rows!r}; "
                "use rows_of(ids) for id values"
            )
        out: set[int] = set()
        for r in items:
            if isinstance(r, (bool, np.bool_)) or not isinstance(r, (int, np.integer)):
                raise SessionError(
                    f"{action}: argument 'rows' must hold row positions (ints), got {r!r}; "
                    "use rows_of(ids) for id values"
                )
            out.add(int(r))
        return sorted(out)

    def take_model_label(self, rows: Rows, *, reason: str = "", note: str = "") -> list[Event]:
        """Relabel each row to the latest fit's model label, one step per distinct label."""
        if self.latest is None:
            raise SessionError("no fit yet: fit first to get the model's labels")
        rows = self._positions("take the model's label", rows)
        suggested = self.latest.rows["model_label"].to_numpy()
        groups: dict[str, list[int]] = {}
        for r in rows:
            s = suggested[r]
            if s is not None and s != self.labels[r]:
                groups.setdefault(str(s), []).append(r)
        return [self.relabel(rs, lab, reason=reason, note=note) for lab, rs in groups.items()]

    def undo(self) -> Event | None:
        if not self._state.can_undo:
            return None
        self._writable()
        saved = self.file.append_event(self._state.make_undo(reviewer=self.reviewer))
        self._state.apply(saved)
        self._remember(saved)
        self._announce("edited", saved)
        return saved

    def redo(self) -> Event | None:
        if not self._state.can_redo:
            return None
        self._writable()
        saved = self.file.append_event(self._state.make_redo(reviewer=self.reviewer))
        self._state.apply(saved)
        self._remember(saved)
        self._announce("edited", saved)
        return saved

    def _edit(
        self,
        action: str,
        rows: Rows,
        *,
        label: str | None = None,
        reason: str = "",
        note: str = "",
    ) -> Event:
        self._writable()
        rows = self._positions(action, rows)
        if not rows and action != values.NOTE:
            raise SessionError(f"{action}: no rows selected")
        bad = [r for r in rows if not 0 <= r < self.n_rows]
        if bad:
            raise SessionError(
                f"{action}: row {bad[0]} is outside the table (0..{self.n_rows - 1})"
            )
        slack = zone = None
        if self.latest is not None:
            slack = self.latest.rows["slack"].to_numpy()[rows].tolist()
            zone = [z or None for z in self.latest.rows["zone"].to_numpy()[rows].tolist()]
        draft = self._state.make_edit(
            action,
            rows,
            reviewer=self.reviewer,
            label=label,
            row_ids=[str(self.ids[r]) for r in rows],
            slack=slack,
            zone=zone,
            reason=reason,
            note=note,
        )
        saved = self.file.append_event(draft)
        self._state.apply(saved)
        self._remember(saved)
        self._announce("edited", saved)
        return saved

    def _writable(self) -> None:
        if self.read_only:
            raise SessionError(
                f"the session is read-only: {self.file.read_only_reason or 'opened to look only'}"
            )

    def _to_current(self, event: Event) -> Event:
        """The event with rows in the current table's positions: by row id when the table
        has an id column (so a re-attached, reordered file still lines up), else as stored."""
        if not self._by_id:
            return event
        rows = tuple(self._where[rid] for rid in event.row_ids)
        return dataclasses.replace(event, rows=rows) if rows != event.rows else event

    # ---- fitting -----------------------------------------------------------------------------
    def set_settings(self, settings: FitSettings) -> None:
        settings.validate()
        self.settings = settings
        if not self.read_only:
            self.file.set_meta("settings", settings.to_dict())
        self._announce("settings", settings)

    @property
    def last_seq(self) -> int:
        """Seq of the newest event in the log (0 when empty)."""
        return self._state.last_seq

    def prepare_fit(self, settings: FitSettings | None = None, *, baseline: bool = False) -> FitJob:
        """Snapshot labels and exclusions (on the session's thread) for :meth:`compute_fit`."""
        return fits.prepare_fit(self, settings, baseline=baseline)

    @staticmethod
    def compute_fit(
        job: FitJob, progress: ProgressFn | None = None, cancel: threading.Event | None = None
    ) -> FitPair:
        """Pure: safe to run on a worker thread. Raises Cancelled if ``cancel`` is set."""
        return fits.compute_fit(job, progress, cancel)

    def apply_fit(self, job: FitJob, result: FitPair | FitResult) -> None:
        """Keep a finished fit as the latest (or the baseline) and save its per-row results."""
        fits.apply_fit(self, job, result)
        self._norms = None
        self._announce("fitted", self.baseline if job.baseline else self.latest)

    def fit(
        self,
        settings: FitSettings | None = None,
        progress: ProgressFn | None = None,
        cancel: threading.Event | None = None,
    ) -> FitResult:
        """Fit on the current labels and keep the result (the command line's one-call path)."""
        if settings is not None:
            self.set_settings(settings)
        job = self.prepare_fit()
        pair = self.compute_fit(job, progress, cancel)
        self.apply_fit(job, pair)
        return pair.result

    def comparison(self) -> Comparison | None:
        """Before (labels as loaded) against after (the edits alone, with the baseline's
        settings); the latest fit beside them when its settings differ. None before a fit."""
        if self.baseline is None or self.latest is None:
            return None
        if self.edits_fit is not None:
            return compare_fits(self.baseline, self.edits_fit, new=self.latest, labels=self.labels)
        if self.latest.settings.same_fit_as(self.baseline.settings):
            return compare_fits(self.baseline, self.latest, labels=self.labels)
        # The latest fit has other settings and no edits-alone fit is at hand (it was saved
        # by an older version, or dropped): show it as the edits and the new settings.
        return compare_fits(self.baseline, self.baseline, new=self.latest, labels=self.labels)

    # ---- context for one row -------------------------------------------------------------------
    def neighbours(self, row: int, k: int = 6) -> pd.DataFrame:
        """The k nearest labelled, included rows in the model's feature space."""
        use = np.array([v is not None for v in self.labels]) & ~self.excluded
        pos, dist = nearest_neighbours(self.X, row, use, k)
        slack = (
            self.latest.rows["slack"].to_numpy()[pos]
            if self.latest is not None
            else np.full(len(pos), np.nan)
        )
        return pd.DataFrame(
            {
                "row": pos,
                "row_id": self.ids[pos],
                "label": self.labels[pos],
                "slack": slack,
                "distance": dist,
            }
        )

    def feature_profile(self, row: int) -> pd.DataFrame:
        norms = self._class_norms()
        label = self.labels[row]
        return feature_profile(
            self.frame, self.roles, norms, row, None if label is None else str(label)
        )

    def prepare_views(self) -> None:
        """Compute what the window's first paint needs (the 2-D projection and the class
        norms of the row panel) now, so a caller off the GUI thread can take that work away
        from the first paint: about 2 s of a million-row session's first paint."""
        self.projection()
        self._class_norms()

    def _class_norms(self) -> ClassNorms:
        if self._norms is None:
            use = np.array([v is not None for v in self.labels]) & ~self.excluded
            self._norms = class_norms(self.frame, self.roles, self.labels, use)
        return self._norms

    def term_contributions(
        self, row: int, k: int = 12, *, all_features: bool = False
    ) -> pd.DataFrame:
        """The terms that pushed ``row`` towards the latest fit's label, largest first.

        For the linear kernel, feature j adds x_j (w_model,j - w_given,j) to the model's
        preference for its label over the row's current label (one weight vector per class
        against the rest; with two classes +-x_j w_j), or, when the two agree, to the label
        against its best rival. Text features only, the k largest positive, unless
        ``all_features``. See ``explain.term_contributions``; ``attrs["reason"]`` says why the
        frame is empty (no fit in memory, a non-linear kernel).
        """
        fit = self.latest
        model = None if fit is None else fit.model
        if fit is None or model is None:
            why = (
                "no fit yet"
                if fit is None
                else "the fit was loaded from the session file; fit again"
            )
            return empty_contributions(f"no per-term contributions: {why}")
        problems = model.problems_
        return term_contributions(
            self.X[row],
            self.feature_names,
            [p.w for p in problems],
            [p.intercept for p in problems],
            [str(c) for c in model.classes_],
            None if self.labels[row] is None else str(self.labels[row]),
            str(fit.rows["model_label"].to_numpy()[row]),
            k,
            all_features=all_features,
        )

    def projection(self) -> tuple[np.ndarray, np.ndarray]:
        """(n, 2) principal-component coordinates of the feature space, and variance shares."""
        if self._projection is None:
            self._projection = projection_2d(self.X)
        return self._projection

    # ---- export --------------------------------------------------------------------------------
    def export(
        self,
        out: str | os.PathLike[str],
        *,
        audit: str | os.PathLike[str] | None = None,
        report: str | os.PathLike[str] | None = None,
        keep_excluded: bool = False,
        overwrite: bool = False,
        images: Mapping[str, bytes] | None = None,
    ) -> list[Path]:
        """Cleaned table in the source's format, plus an optional audit log and HTML summary.

        ``images`` (caption -> PNG bytes) are embedded in the summary."""
        return handover.export(
            self,
            out,
            audit=audit,
            report=report,
            keep_excluded=keep_excluded,
            overwrite=overwrite,
            images=images,
        )

    def summary_for_report(self, written: Sequence[Path] = ()) -> dict[str, Any]:
        return handover.summary_for_report(self, written)
