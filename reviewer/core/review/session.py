"""ReviewSession: the single door through which the window and the command line work.

It owns the loaded table, the column roles, the fit settings, the edit log (kept in a
SQLite session file, one commit per action) and the fits. Long computations are split in
two: ``compute_fit`` is pure and may run on a worker thread; ``apply_fit`` stores the
result and must run on the thread that opened the session (SQLite connections are not
shared between threads).
"""

from __future__ import annotations

import dataclasses
import getpass
import os
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from reviewer._version import __version__
from reviewer.core import values
from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import LoadedTable, label_strings, load_table, sha256_of
from reviewer.core.data.roles import (
    ColumnRoles,
    guess_id_column,
    guess_label_column,
    infer_kind,
    infer_roles,
)
from reviewer.core.errors import InputError, SessionError, SourceChangedError
from reviewer.core.model.fitting import FitResult, fit_margins
from reviewer.core.model.scan import row_ids
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.review.context import (
    ClassNorms,
    class_norms,
    feature_profile,
    nearest_neighbours,
    projection_2d,
)
from reviewer.core.review.editlog import Event, LabelState
from reviewer.core.review.sessionfile import SessionFile
from reviewer.core.values import ROW_COLUMNS, FitSettings, FitSummary

SESSION_SUFFIX = ".review.sqlite"
APP_NAME = "margin-reviewer"
Listener = Callable[[str, Any], None]


def default_reviewer() -> str:
    try:
        return getpass.getuser() or "reviewer"
    except Exception:  # no login name in some containers
        return "reviewer"


def default_session_path(data_path: Path, sha256: str) -> Path:
    """Beside the data file as ``<name>.review.sqlite``; the user data folder when that
    folder is not writable."""
    data_path = Path(data_path).resolve()
    beside = data_path.with_name(data_path.name + SESSION_SUFFIX)
    if beside.exists() or os.access(data_path.parent, os.W_OK):
        return beside
    from platformdirs import user_data_dir

    folder = Path(user_data_dir(APP_NAME, appauthor=False)) / "sessions"
    folder.mkdir(parents=True, exist_ok=True)
    return folder / f"{data_path.stem}-{sha256[:12]}{SESSION_SUFFIX}"


@dataclass
class TablePreview:
    """What the column-roles dialog shows before a session is opened."""

    source: Any
    head: pd.DataFrame
    columns: list[str]
    guessed_label: str | None
    guessed_id: str | None
    kinds: dict[str, tuple[str, str]]  # column -> (kind, reason)
    remembered: dict[str, Any] | None  # roles saved in an existing session file


@dataclass
class FitJob:
    """A snapshot of everything a fit needs, so it can run on a worker thread."""

    X: np.ndarray
    labels: np.ndarray
    excluded: np.ndarray
    settings: FitSettings
    last_seq: int
    baseline: bool


class ReviewSession:
    """One reviewed data set. Open it with :meth:`open`; close it when done."""

    def __init__(
        self,
        loaded: LoadedTable,
        roles: ColumnRoles,
        file: SessionFile,
        reviewer: str,
        settings: FitSettings,
        X: np.ndarray,
        feature_names: list[str],
        warnings: list[str],
    ) -> None:
        self.loaded = loaded
        self.roles = roles
        self.file = file
        self.reviewer = reviewer
        self.settings = settings
        self.X = X
        self.feature_names = feature_names
        self.warnings = warnings
        self.ids = row_ids(loaded.frame, roles.id)
        self.source_labels = label_strings(loaded.frame[roles.label])
        events = file.events()
        self._by_id = roles.id is not None
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
        )
        self._events: list[Event] = []
        self._by_row: dict[int, list[int]] = {}
        for e in events:
            self._remember(e)
        self._listeners: list[Listener] = []
        self.latest: FitResult | None = None
        self.baseline: FitResult | None = None
        self.latest_seq: int | None = None
        self._norms: ClassNorms | None = None
        self._projection: tuple[np.ndarray, np.ndarray] | None = None
        self._load_saved_fits()

    # ---- opening ---------------------------------------------------------------------------
    @staticmethod
    def preview(
        data_path: str | os.PathLike[str], *, rows: int = 20, progress: ProgressFn | None = None
    ) -> TablePreview:
        """Load a file and guess its roles, for the column-roles dialog."""
        loaded = load_table(data_path, progress=progress)
        frame = loaded.frame
        label = guess_label_column(frame)
        ident = guess_id_column(frame, label)
        kinds = {c: infer_kind(frame[c]) for c in frame.columns}
        remembered = None
        path = default_session_path(loaded.source.path, loaded.source.sha256)
        if path.exists():
            try:
                with SessionFile.open(path, read_only=True) as f:
                    meta = f.meta
                remembered = {
                    "label": meta.get("label_column"),
                    "id": meta.get("id_column"),
                    "roles": meta.get("roles"),
                }
            except SessionError:
                remembered = None
        return TablePreview(
            loaded.source, frame.head(rows), list(frame.columns), label, ident, kinds, remembered
        )

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
        progress: ProgressFn | None = None,
        cancel=None,
    ) -> ReviewSession:
        """Open (or start) the review of ``data_path``.

        An existing session file resumes where the reviewer left off, with its remembered
        roles. If the data file changed since the session began, SourceChangedError is
        raised unless ``read_only`` (look only) or ``reattach`` (match rows by the id
        column; rows that no longer exist are reported in ``warnings``).
        """
        report = Reporter(progress, cancel)
        loaded = load_table(data_path, progress=report.slice(0.0, 0.6), cancel=cancel)
        src = loaded.source
        path = Path(session_path) if session_path else default_session_path(src.path, src.sha256)
        warnings: list[str] = []
        if path.exists():
            file = SessionFile.open(path, read_only=read_only)
            try:
                meta = file.meta
                label_col = meta.get("label_column")
                id_col = meta.get("id_column")
                if label and label != label_col:
                    raise SessionError(
                        f"session {path} reviews label column {label_col!r}, not {label!r}; "
                        "choose another session file to review a different column"
                    )
                roles = ColumnRoles.from_dict(meta["roles"]) if meta.get("roles") else None
                if roles is None or any(
                    c not in loaded.frame.columns for c in [roles.label, *roles.features]
                ):
                    roles = infer_roles(loaded.frame, label_col, id_col, overrides)
                settings = FitSettings.from_dict(meta.get("settings") or {})
                changed = meta.get("source_sha256") != src.sha256
                if changed and not (read_only or reattach):
                    raise SourceChangedError(
                        f"{src.path} changed since session {path} began (SHA-256 differs). "
                        "Open it read-only to look, or re-attach by the id column"
                        + (
                            f" {id_col!r}"
                            if id_col
                            else " (this table has none, so only read-only)"
                        )
                    )
                if changed and reattach:
                    if not id_col:
                        raise SourceChangedError(
                            f"{src.path} changed and session {path} has no id column "
                            "to re-attach by; "
                            "open it read-only instead"
                        )
                    if file.read_only:
                        raise SessionError(f"cannot re-attach: {file.read_only_reason}")
                    file.set_meta("source_sha256", src.sha256)
                    file.set_meta("source_path", str(src.path))
                if changed and read_only:
                    warnings.append(f"{src.path} changed since the session began; opened read-only")
                if file.read_only_reason:
                    warnings.append(file.read_only_reason)
            except BaseException:
                file.close()
                raise
        else:
            if read_only:
                raise SessionError(f"no session file at {path} to open read-only")
            if label is None:
                raise InputError(f"{src.path}: choose the label column (--label)")
            roles = infer_roles(loaded.frame, label, id_column, overrides)
            settings = FitSettings()
            file = SessionFile.create(
                path,
                {
                    "source_path": str(src.path),
                    "source_sha256": src.sha256,
                    "label_column": roles.label,
                    "id_column": roles.id,
                    "roles": roles.to_dict(),
                    "settings": settings.to_dict(),
                    "reviewer": reviewer or default_reviewer(),
                    "app_version": __version__,
                },
            )
        try:
            report(0.65, "building features")
            X, names = feature_matrix(loaded.frame, roles)
            session = cls(
                loaded, roles, file, reviewer or default_reviewer(), settings, X, names, warnings
            )
        except BaseException:
            file.close()
            raise
        report(1.0, "session open")
        return session

    def close(self) -> None:
        self.file.close()

    def __enter__(self) -> ReviewSession:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ---- listeners ---------------------------------------------------------------------------
    def subscribe(self, listener: Listener) -> None:
        """``listener(kind, payload)`` is called after "edited", "fitted" and "settings" changes."""
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
        present = {str(v) for v in self.labels if v is not None}
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
    def confirm(self, rows: Iterable[int], *, reason: str = "", note: str = "") -> Event:
        return self._edit(values.CONFIRM, rows, reason=reason, note=note)

    def relabel(
        self, rows: Iterable[int], label: str, *, reason: str = "", note: str = ""
    ) -> Event:
        label = str(label).strip()
        if not label:
            raise SessionError("a new label cannot be empty")
        return self._edit(values.RELABEL, rows, label=label, reason=reason, note=note)

    def exclude(self, rows: Iterable[int], *, reason: str = "", note: str = "") -> Event:
        return self._edit(values.EXCLUDE, rows, reason=reason, note=note)

    def restore(self, rows: Iterable[int], *, reason: str = "", note: str = "") -> Event:
        return self._edit(values.RESTORE, rows, reason=reason, note=note)

    def add_note(self, rows: Iterable[int], text: str) -> Event:
        return self._edit(values.NOTE, rows, note=text)

    def take_model_label(
        self, rows: Iterable[int], *, reason: str = "", note: str = ""
    ) -> list[Event]:
        """Relabel each row to the latest fit's model label, one step per distinct label."""
        if self.latest is None:
            raise SessionError("no fit yet: fit first to get the model's labels")
        rows = [int(r) for r in rows]
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
        rows: Iterable[int],
        *,
        label: str | None = None,
        reason: str = "",
        note: str = "",
    ) -> Event:
        self._writable()
        rows = sorted({int(r) for r in rows})
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

    def prepare_fit(self, settings: FitSettings | None = None, *, baseline: bool = False) -> FitJob:
        """Snapshot labels and exclusions (on the session's thread) for :meth:`compute_fit`."""
        settings = (settings or self.settings).validate()
        if baseline:
            labels, excluded = self.source_labels.copy(), np.zeros(self.n_rows, dtype=bool)
        else:
            labels, excluded = self.labels.copy(), self.excluded.copy()
        return FitJob(self.X, labels, excluded, settings, self._state.last_seq, baseline)

    @staticmethod
    def compute_fit(job: FitJob, progress: ProgressFn | None = None, cancel=None) -> FitResult:
        """Pure: safe to run on a worker thread. Raises Cancelled if ``cancel`` is set."""
        return fit_margins(
            job.X, job.labels, job.settings, excluded=job.excluded, progress=progress, cancel=cancel
        )

    def apply_fit(self, job: FitJob, result: FitResult) -> None:
        """Keep a finished fit as the latest (or the baseline) and save its per-row results."""
        slot = "baseline" if job.baseline else "latest"
        if not self.read_only:
            self.file.save_fit(
                slot, result.settings.to_dict(), _jsonable(result.summary.to_dict()), result.rows
            )
        if job.baseline:
            self.baseline = result
        else:
            self.latest = result
            self.latest_seq = job.last_seq
            if self.baseline is None and job.last_seq == 0:
                self.baseline = result
                if not self.read_only:
                    self.file.save_fit(
                        "baseline",
                        result.settings.to_dict(),
                        _jsonable(result.summary.to_dict()),
                        result.rows,
                    )
        self._norms = None
        self._announce("fitted", result)

    def fit(
        self, settings: FitSettings | None = None, progress: ProgressFn | None = None, cancel=None
    ) -> FitResult:
        """Fit on the current labels and keep the result (the command line's one-call path)."""
        if settings is not None:
            self.set_settings(settings)
        job = self.prepare_fit()
        result = self.compute_fit(job, progress, cancel)
        self.apply_fit(job, result)
        return result

    def _load_saved_fits(self) -> None:
        for slot in ("baseline", "latest"):
            record = self.file.load_fit(slot)
            if (
                record is None
                or len(record.rows) != self.n_rows
                or list(record.rows.columns) != list(ROW_COLUMNS)
            ):
                continue
            rows = record.rows.copy()
            for col in ("zone", "support", "model_label"):
                rows[col] = rows[col].astype(object).where(rows[col].notna(), None)
            result = FitResult(
                rows=rows,
                settings=FitSettings.from_dict(record.settings),
                summary=FitSummary.from_dict(record.summary),
            )
            if slot == "baseline":
                self.baseline = result
            else:
                self.latest = result
                self.latest_seq = record.last_seq

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
        if self._norms is None:
            use = np.array([v is not None for v in self.labels]) & ~self.excluded
            self._norms = class_norms(self.frame, self.roles, self.labels, use)
        label = self.labels[row]
        return feature_profile(
            self.frame, self.roles, self._norms, row, None if label is None else str(label)
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

        ``images`` (caption -> PNG bytes, drawn by the window) are embedded in the summary."""
        from reviewer.core.output import export as ex

        src = self.loaded.source
        if sha256_of(src.path) != src.sha256:
            raise SourceChangedError(
                f"{src.path} changed on disk since it was opened; reopen it before exporting"
            )
        protect = [src.path, self.session_path]
        written = [
            ex.export_cleaned(
                src,
                self.roles.label,
                list(self.labels),
                self.excluded,
                out,
                source_labels=list(self.source_labels),
                keep_excluded=keep_excluded,
                overwrite=overwrite,
            )
        ]
        events = [e.to_dict() for e in self.events()]
        if audit:
            writer = (
                ex.write_audit_jsonl
                if str(audit).lower().endswith((".jsonl", ".json"))
                else ex.write_audit_csv
            )
            written.append(writer(events, audit, overwrite=overwrite, protect=protect))
        if report:
            summary = self.summary_for_report(written)
            if images:
                summary["images"] = dict(images)
            written.append(
                ex.write_summary_html(summary, report, overwrite=overwrite, protect=protect)
            )
        return written

    def summary_for_report(self, written: Sequence[Path] = ()) -> dict[str, Any]:
        events = self.events()
        by_action: dict[str, int] = {}
        by_reason: dict[str, int] = {}
        for e in events:
            by_action[e.action] = by_action.get(e.action, 0) + 1
            if e.reason:
                by_reason[e.reason] = by_reason.get(e.reason, 0) + 1
        summary: dict[str, Any] = {
            "source_path": str(self.loaded.source.path),
            "source_sha256": self.loaded.source.sha256,
            "reviewer": self.reviewer,
            "label_column": self.roles.label,
            "settings": (self.latest.settings if self.latest else self.settings).to_dict(),
            "counts_by_action": by_action,
            "counts_by_reason": by_reason,
        }
        if written:
            summary["cleaned_path"] = str(written[0])
        from reviewer.core.review.compare import compare_fits

        if self.baseline is not None and self.latest is not None:
            comparison = compare_fits(self.baseline, self.latest)
            summary["metrics"] = comparison.metrics
            summary["changed_rows"] = [
                {"row_id": str(self.ids[r]), **{k: v for k, v in ch.items() if k != "row"}}
                for r, ch in zip(
                    comparison.changed_rows["row"],
                    comparison.changed_rows.to_dict("records"),
                    strict=True,
                )
            ][:500]
        return summary


def _jsonable(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def export_session(
    session_path: Path,
    *,
    out: Path,
    audit: Path | None = None,
    report: Path | None = None,
    keep_excluded: bool = False,
    overwrite: bool = False,
) -> list[Path]:
    """The command line's export: open the session read-only next to its source file."""
    if not Path(session_path).is_file():
        raise SessionError(f"session file {session_path} not found")
    with SessionFile.open(session_path, read_only=True) as f:
        meta = f.meta
    source = meta.get("source_path")
    if not source or not Path(source).is_file():
        raise SessionError(f"the data file of session {session_path} is missing: {source}")
    with ReviewSession.open(source, session_path=session_path, read_only=True) as session:
        if session.warnings and any("changed" in w for w in session.warnings):
            raise SourceChangedError(
                f"{source} changed since session {session_path} began; "
                "re-attach it in the window first"
            )
        return session.export(
            out, audit=audit, report=report, keep_excluded=keep_excluded, overwrite=overwrite
        )
