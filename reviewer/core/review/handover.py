"""Handing the review over: the cleaned table, the audit log and the report, from a session."""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from reviewer.core import values
from reviewer.core.data.loading import sha256_of
from reviewer.core.errors import SessionError, SourceChangedError
from reviewer.core.review.sessionfile import SessionFile

if TYPE_CHECKING:
    from reviewer.core.review.session import ReviewSession


def export(
    session: ReviewSession,
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

    src = session.loaded.source
    if sha256_of(src.path) != src.sha256:
        raise SourceChangedError(
            f"{src.path} changed on disk since it was opened; reopen it before exporting"
        )
    summary = summary_for_report(session) if report else None
    if summary is not None and images:
        summary["images"] = dict(images)
    return ex.export_set(
        src,
        session.roles.label,
        list(session.labels),
        session.excluded,
        out,
        source_labels=list(session.source_labels),
        events=[e.to_dict() for e in session.events()],
        audit=audit,
        report=report,
        summary=summary,
        keep_excluded=keep_excluded,
        overwrite=overwrite,
        protect=[session.session_path],
        session_path=session.session_path,
    )


def summary_for_report(session: ReviewSession, written: Sequence[Path] = ()) -> dict[str, Any]:
    events = session.events()
    # Decisions count the rows they name; undo, redo and notes count as steps of their own.
    unit = {"undo": "steps", "redo": "steps", "note": "notes"}
    by_action: dict[str, int] = {}
    by_reason: dict[str, int] = {}
    for e in events:
        key = f"{e.action} ({unit.get(e.action, 'rows')})"
        by_action[key] = by_action.get(key, 0) + (1 if e.action in unit else len(e.rows))
        if e.reason:
            by_reason[e.reason] = by_reason.get(e.reason, 0) + 1
    summary: dict[str, Any] = {
        "source_path": str(session.loaded.source.path),
        "source_sha256": session.loaded.source.sha256,
        "reviewer": session.reviewer,
        "label_column": session.roles.label,
        "settings": (session.latest.settings if session.latest else session.settings).to_dict(),
        "fit_out_of_date": session.latest is not None and not session.fit_is_current,
        "counts_by_action": by_action,
        "counts_by_reason": by_reason,
    }
    if written:
        summary["cleaned_path"] = str(written[0])
    if session.latest is not None:
        # The figures are drawn from these: the slack the ranking uses, now and before.
        summary["heldout_slack"] = session.latest.rows["heldout_slack"].to_numpy()
        summary["slack"] = session.latest.rows["slack"].to_numpy()
    if session.baseline is not None:
        summary["baseline_heldout_slack"] = session.baseline.rows["heldout_slack"].to_numpy()
        summary["baseline_slack"] = session.baseline.rows["slack"].to_numpy()
    comparison = session.comparison()
    if comparison is not None:
        summary["metrics"] = comparison.metrics
        if comparison.metrics_new is not None:
            summary["metrics_new_settings"] = comparison.metrics_new
            summary["settings_by_side"] = {
                "before and after": comparison.before_settings,
                "edits and new settings": comparison.new_settings,
            }
        review = session.review
        changed = comparison.changed_rows.assign(
            decided=[values.REVIEW_NAMES[review[r]] for r in comparison.changed_rows["row"]],
            _moved=(
                comparison.changed_rows["slack_after"] - comparison.changed_rows["slack_before"]
            ).abs(),
            _open=[review[r] == values.OPEN for r in comparison.changed_rows["row"]],
        )
        # Rows the reviewer decided first, then the largest moves: a zone change by a hair
        # across slack = 1 goes to the end.
        changed = changed.sort_values(["_open", "_moved"], ascending=[True, False])
        summary["changed_rows"] = [
            {"row_id": str(session.ids[int(ch["row"])])}
            | {k: v for k, v in ch.items() if k != "row" and not k.startswith("_")}
            for ch in changed.to_dict("records")
        ][:500]
    decided = np.flatnonzero(session.review != values.OPEN)
    if len(decided):
        last_reason: dict[int, str] = {}
        for e in events:
            if e.action in values.EDIT_ACTIONS:
                for r in e.rows:
                    last_reason[r] = e.reason or e.note
        summary["decided_rows"] = [
            {
                "row_id": str(session.ids[r]),
                "label_before": session.source_labels[r],
                "label": session.labels[r],
                "decision": values.REVIEW_NAMES[session.review[r]],
                "reason": last_reason.get(int(r), ""),
            }
            for r in decided[:2000]
        ]
    return summary


def export_session(
    session_path: Path,
    *,
    out: Path,
    audit: Path | None = None,
    report: Path | None = None,
    keep_excluded: bool = False,
    overwrite: bool = False,
    on_warning: Callable[[str], None] | None = None,
) -> list[Path]:
    """The command line's export: open the session read-only next to its source file.
    ``on_warning`` hears what opening it had to say (a damaged fit dropped, say)."""
    if not Path(session_path).is_file():
        raise SessionError(f"session file {session_path} not found")
    with SessionFile.open(session_path, read_only=True) as f:
        meta = f.meta
    source = meta.get("source_path")
    if not source or not Path(source).is_file():
        raise SessionError(f"the data file of session {session_path} is missing: {source}")
    from reviewer.core.review.session import ReviewSession

    with ReviewSession.open(source, session_path=session_path, read_only=True) as session:
        if session.warnings and any("changed" in w for w in session.warnings):
            raise SourceChangedError(
                f"{source} changed since session {session_path} began; "
                "re-attach it in the window first"
            )
        if on_warning is not None:
            for warning in session.warnings:
                if warning != "opened read-only on request":  # as asked: nothing to say
                    on_warning(warning)
        return session.export(
            out, audit=audit, report=report, keep_excluded=keep_excluded, overwrite=overwrite
        )
