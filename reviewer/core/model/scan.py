"""The scan table: one row per input row, in input order, with the ranking columns."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from reviewer.core.data.dataset import Vectors, prepare_dataset
from reviewer.core.data.duplicates import conflicting_duplicates
from reviewer.core.data.loading import LoadedTable
from reviewer.core.data.roles import ColumnRoles
from reviewer.core.model.fitting import FitResult, fit_margins
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.values import FitSettings, formula_warning

SCAN_COLUMNS = (
    "row_id",
    "label",
    "model_label",
    "margin",
    "slack",
    "heldout_margin",
    "heldout_slack",
    "alpha",
    "zone",
    "support",
    "score",
    "rank",
)


@dataclass
class ScanOutcome:
    table: pd.DataFrame
    fit: FitResult
    roles: ColumnRoles
    feature_names: list[str]
    nonzeros: int = 0  # stored values of the feature matrix (all of them when dense)


def scan_table(
    loaded: LoadedTable,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    overrides: Mapping[str, str] | None = None,
    treat_as_classes: bool = False,
    vectors: Vectors | None = None,
    progress: ProgressFn | None = None,
    cancel=None,
) -> ScanOutcome:
    report = Reporter(progress, cancel)
    settings = (settings or FitSettings()).validate()
    report(0.0, "building features")
    data = prepare_dataset(
        loaded,
        label=label,
        id_column=id_column,
        overrides=overrides,
        check_label=not treat_as_classes,
        vectors=vectors,
    )
    roles, labels, ids = data.roles, data.labels, data.ids
    fit = fit_margins(
        data.X,
        labels,
        settings,
        progress=report.slice(0.05, 1.0),
        cancel=cancel,
        fold_features=data.fold_features,
    )
    fit.summary.notes.extend(data.notes)
    warning = formula_warning(labels, "labels in the data")
    if warning:
        fit.summary.notes.append(warning)
    groups = conflicting_duplicates(_hashable(loaded.frame, roles), roles, labels)
    if groups:
        shown = "; ".join(", ".join(str(ids[r]) for r in g[:4]) for g in groups[:3])
        fit.summary.notes.append(
            f"{len(groups)} group(s) of rows with identical features but different labels "
            f"(a classic sign of label noise), e.g. {shown}"
        )
    nonzeros = int(getattr(data.X, "nnz", data.X.size))
    return ScanOutcome(scan_frame(fit, labels, ids), fit, roles, data.feature_names, nonzeros)


def _hashable(frame: pd.DataFrame, roles: ColumnRoles) -> pd.DataFrame:
    """Vector columns as tuples, so rows can be compared and hashed."""
    if not roles.vector:
        return frame
    out = frame.copy(deep=False)
    for col in roles.vector:
        out[col] = [tuple(np.asarray(v).tolist()) for v in frame[col]]
    return out


def scan_frame(fit: FitResult, labels: np.ndarray, ids: np.ndarray) -> pd.DataFrame:
    rows = fit.rows
    out = pd.DataFrame({"row_id": ids, "label": labels})
    for col in SCAN_COLUMNS[2:]:
        out[col] = rows[col].to_numpy()
    rank = out["rank"].astype("Int64")
    out["rank"] = rank.where(rank > 0)
    return out[list(SCAN_COLUMNS)]
