"""The session's fits: the baseline (labels as loaded), the latest, and the edits-alone fit.

A fit runs in three steps so the window can keep painting: `prepare_fit` snapshots labels
and exclusions on the session's thread, `compute_fit` is pure and may run on a worker, and
`apply_fit` stores the result on the session's thread (SQLite connections stay on the thread
that opened them).

Before against after must show what the edits did, and nothing else. When the latest fit's
settings differ from the baseline's (``auto`` chose again, or the reviewer changed C), the
same job also fits the edited labels with the baseline's resolved settings: that is the
"edits alone" fit the comparison uses, and the latest fit is shown beside it as "edits and
new settings".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from reviewer.core.errors import SessionError
from reviewer.core.model.fitting import FitResult, fit_margins
from reviewer.core.model.heldout import FoldFeatures
from reviewer.core.plain import plain
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.review.sessionfile import FitRecord
from reviewer.core.values import ROW_COLUMNS, FitSettings, FitSummary

if TYPE_CHECKING:
    import threading

    from reviewer.core.review.session import ReviewSession


@dataclass
class FitJob:
    """A snapshot of everything a fit needs, so it can run on a worker thread."""

    X: Any  # dense array, or CSR with text columns
    labels: np.ndarray
    excluded: np.ndarray
    settings: FitSettings
    last_seq: int
    baseline: bool
    edits_settings: FitSettings | None = None
    """The baseline's resolved settings, for the edits-alone fit (None for a baseline job)."""
    fold_features: FoldFeatures | None = None
    """Rebuilds a held-out fold's matrices from its training rows (text columns)."""


@dataclass
class FitPair:
    """What a job computed: the fit asked for, and the edits-alone fit when it differs."""

    result: FitResult
    edits_only: FitResult | None = None


def prepare_fit(
    session: ReviewSession, settings: FitSettings | None = None, *, baseline: bool = False
) -> FitJob:
    settings = (settings or session.settings).validate()
    if baseline:
        labels, excluded = session.source_labels.copy(), np.zeros(session.n_rows, dtype=bool)
    else:
        labels, excluded = session.labels.copy(), session.excluded.copy()
    edits = None
    if not baseline and session.baseline is not None:
        edits = session.baseline.settings.as_fixed()
    return FitJob(
        session.X,
        labels,
        excluded,
        settings,
        session.last_seq,
        baseline,
        edits,
        fold_features=session.fold_features,
    )


def compute_fit(
    job: FitJob, progress: ProgressFn | None = None, cancel: threading.Event | None = None
) -> FitPair:
    """Pure: safe on a worker thread. Raises Cancelled if ``cancel`` is set."""
    report = Reporter(progress, cancel)
    # With fixed settings it is known now whether a second fit is needed; with auto, only
    # after the first one has chosen, so leave room for it.
    edits = job.edits_settings
    main_end = 0.6 if edits is not None and not job.settings.same_fit_as(edits) else 1.0
    result = fit_margins(
        job.X,
        job.labels,
        job.settings,
        excluded=job.excluded,
        progress=report.slice(0.0, main_end),
        cancel=cancel,
        fold_features=job.fold_features,
    )
    edits_only = None
    if job.edits_settings is not None and not result.settings.same_fit_as(job.edits_settings):
        edits_only = fit_margins(
            job.X,
            job.labels,
            job.edits_settings,
            excluded=job.excluded,
            progress=report.slice(main_end, 1.0),
            cancel=cancel,
            fold_features=job.fold_features,
        )
    report(1.0, "fit finished")
    return FitPair(result, edits_only)


def apply_fit(session: ReviewSession, job: FitJob, pair: FitPair | FitResult) -> None:
    """Keep a finished fit as the latest (or the baseline) and save its per-row results."""
    if isinstance(pair, FitResult):
        pair = FitPair(pair)
    result = pair.result
    if job.baseline:
        _save(session, "baseline", result)
        session.baseline = result
    else:
        _save(session, "latest", result)
        session.latest = result
        session.latest_seq = job.last_seq
        session.edits_fit = pair.edits_only
        if pair.edits_only is not None:
            _save(session, "edits", pair.edits_only)
        if session.baseline is None and job.last_seq == 0:
            session.baseline = result
            _save(session, "baseline", result)


def _save(session: ReviewSession, slot: str, result: FitResult) -> None:
    if not session.read_only:
        session.file.save_fit(
            slot, result.settings.to_dict(), plain(result.summary.to_dict()), result.rows
        )


def load_saved_fits(session: ReviewSession) -> list[str]:
    """Put the fits saved in the session file back; returns a warning per fit dropped."""
    warnings: list[str] = []
    for slot in ("baseline", "latest", "edits"):
        try:
            record = session.file.load_fit(slot)
        except SessionError as exc:
            warnings.append(f"the saved {slot} fit was dropped ({exc}); refit to get it back")
            continue
        result = _as_result(record, session.n_rows)
        if result is None:
            continue
        if slot == "baseline":
            session.baseline = result
        elif slot == "latest":
            session.latest = result
            session.latest_seq = record.last_seq if record else None
        elif record is not None and record.last_seq == session.latest_seq:
            session.edits_fit = result  # only while it belongs to the latest fit
    return warnings


def _as_result(record: FitRecord | None, n_rows: int) -> FitResult | None:
    if record is None or len(record.rows) != n_rows:
        return None
    if list(record.rows.columns) != list(ROW_COLUMNS):
        return None
    rows: pd.DataFrame = record.rows.copy()
    for col in ("zone", "support", "model_label"):
        rows[col] = rows[col].astype(object).where(rows[col].notna(), None)
    return FitResult(
        rows=rows,
        settings=FitSettings.from_dict(record.settings),
        summary=FitSummary.from_dict(record.summary),
    )
