"""The door into core: everything the window and the command line may use.

The window and the command line import this module, ``reviewer.core.values`` and
``reviewer.core.errors``, and nothing else from core (an import-linter contract checks it).
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from reviewer.core.data.dataset import Vectors
from reviewer.core.data.loading import LoadedTable, load_table, table_from_frame
from reviewer.core.data.roles import KINDS
from reviewer.core.model.engine import SoftMarginClassifier
from reviewer.core.model.probe import ProbeResult, format_probe, probe_table
from reviewer.core.model.scan import ScanOutcome, scan_table
from reviewer.core.model.tuning import CURVE_CS, c_curve_for_labels
from reviewer.core.output.manifest import manifest_path_for, verify_manifest
from reviewer.core.output.scantable import check_scan_target, write_scan_table, write_text
from reviewer.core.progress import Reporter
from reviewer.core.review.compare import CAUTION as COMPARISON_CAUTION
from reviewer.core.review.compare import Comparison, score_on_reference
from reviewer.core.review.plotdata import (
    PROJECTION_LIMIT,
    Boundary,
    CurveSeries,
    Histogram,
    ProjectionPoints,
    boundary_in_projection,
    curve_series,
    metrics_table,
    session_projection,
    slack_above,
    slack_histogram,
)
from reviewer.core.review.queue import ATTENTION, NEEDS_A_LOOK, next_open_position, row_mask
from reviewer.core.review.session import (
    APP_NAME,
    FitJob,
    ReviewSession,
    TablePreview,
    default_session_path,
    export_session,
)
from reviewer.core.values import FitSettings

__all__ = [
    "APP_NAME",
    "ATTENTION",
    "COMPARISON_CAUTION",
    "CURVE_CS",
    "KINDS",
    "NEEDS_A_LOOK",
    "PROJECTION_LIMIT",
    "Boundary",
    "Comparison",
    "CurveSeries",
    "FitJob",
    "Histogram",
    "LoadedTable",
    "ProbeResult",
    "ProjectionPoints",
    "ReviewSession",
    "ScanOutcome",
    "SoftMarginClassifier",
    "TablePreview",
    "Vectors",
    "boundary_in_projection",
    "c_curve_job",
    "check_scan_target",
    "compare",
    "curve_series",
    "default_session_path",
    "export_session",
    "format_probe",
    "load_table",
    "manifest_path_for",
    "metrics_table",
    "next_open_position",
    "probe_file",
    "probe_loaded",
    "read_reference",
    "row_mask",
    "scan_file",
    "scan_loaded",
    "score_reference",
    "session_projection",
    "slack_above",
    "slack_histogram",
    "table_from_frame",
    "verify_manifest",
    "write_scan_table",
    "write_text",
]


def scan_file(
    data: str | Path,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    treat_as_classes: bool = False,
    sheet: str | None = None,
    overrides: Mapping[str, str] | None = None,
    vectors: str | Path | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> ScanOutcome:
    """Load a table and rank its rows: the ``scan`` command's work. ``overrides`` maps a
    column to one of KINDS; ``vectors`` is a .npy file of shape (rows, d)."""
    report = Reporter(progress)
    loaded = load_table(data, sheet=sheet, progress=report.slice(0.0, 0.1))
    return scan_loaded(
        loaded,
        label,
        id_column=id_column,
        settings=settings,
        overrides=overrides,
        treat_as_classes=treat_as_classes,
        vectors=vectors,
        progress=report.slice(0.1, 1.0),
    )


def probe_file(
    data: str | Path,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    rate: float = 0.05,
    seed: int = 0,
    treat_as_classes: bool = False,
    sheet: str | None = None,
    overrides: Mapping[str, str] | None = None,
    vectors: str | Path | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> ProbeResult:
    """Load a table, plant known flips in a copy and measure how many the ranking finds."""
    report = Reporter(progress)
    loaded = load_table(data, sheet=sheet, progress=report.slice(0.0, 0.1))
    return probe_loaded(
        loaded,
        label,
        id_column=id_column,
        settings=settings,
        rate=rate,
        seed=seed,
        overrides=overrides,
        treat_as_classes=treat_as_classes,
        vectors=vectors,
        progress=report.slice(0.1, 1.0),
    )


def scan_loaded(
    loaded: LoadedTable,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    overrides: Mapping[str, str] | None = None,
    treat_as_classes: bool = False,
    vectors: Vectors | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> ScanOutcome:
    """Rank the rows of a table already loaded (from a file or a DataFrame)."""
    return scan_table(
        loaded,
        label,
        id_column=id_column,
        settings=settings or FitSettings(),
        overrides=overrides,
        treat_as_classes=treat_as_classes,
        vectors=vectors,
        progress=progress,
    )


def probe_loaded(
    loaded: LoadedTable,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    rate: float = 0.05,
    seed: int = 0,
    overrides: Mapping[str, str] | None = None,
    treat_as_classes: bool = False,
    vectors: Vectors | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> ProbeResult:
    """The probe on a table already loaded."""
    return probe_table(
        loaded,
        label,
        id_column=id_column,
        settings=settings or FitSettings(),
        rate=rate,
        seed=seed,
        overrides=overrides,
        treat_as_classes=treat_as_classes,
        vectors=vectors,
        progress=progress,
    )


def compare(session: ReviewSession) -> Comparison | None:
    """Before (labels as loaded) against after (the edits alone, fitted with the baseline's
    settings), with the latest fit beside them when its settings differ; None before a fit."""
    return session.comparison()


def read_reference(path: str | Path) -> pd.DataFrame:
    """A trusted reference table, read like any data file."""
    return load_table(path).frame


def score_reference(
    session: ReviewSession, frame: pd.DataFrame, id_column: str, label_column: str
) -> dict[str, Any] | None:
    """Both fits' model labels scored against trusted labels, rows matched by id."""
    if session.baseline is None or session.latest is None:
        return None
    return score_on_reference(
        session.ids, session.baseline.rows, session.latest.rows, frame, id_column, label_column
    )


def c_curve_job(
    session: ReviewSession, *, kernel: str, Cs: Sequence[float] = CURVE_CS
) -> Callable[..., dict[str, Any]]:
    """The C curve over the session's current labels and exclusions, as a job for a worker.

    The job takes ``progress`` and ``cancel`` keyword arguments; the labels are copied now,
    so edits made while it runs do not reach it.
    """
    st = session.settings
    return functools.partial(
        c_curve_for_labels,
        session.X,
        np.array(session.labels, dtype=object, copy=True),
        np.array(session.excluded, copy=True),
        kernel=kernel,
        Cs=tuple(float(c) for c in Cs),
        degree=int(st.degree),
        class_weight=st.class_weight,
        folds=int(st.folds) if st.folds else 5,
        seed=int(st.seed),
    )
