"""One prepared data set: the loaded table, its roles, its feature matrix, labels and ids.

Opening a session, a scan and a probe all start from here, so they read a table the same
way: load, decide roles, build features, read the labels as text, name every row.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import LoadedTable, label_strings
from reviewer.core.data.roles import ColumnRoles, infer_roles
from reviewer.core.errors import InputError


@dataclass
class Dataset:
    loaded: LoadedTable
    roles: ColumnRoles
    X: np.ndarray
    feature_names: list[str]
    labels: np.ndarray  # the label column as text, None where missing
    ids: np.ndarray  # the id column as text, else the 0-based data-row position

    @property
    def frame(self) -> pd.DataFrame:
        return self.loaded.frame


def row_ids(frame: pd.DataFrame, id_column: str | None) -> np.ndarray:
    """The id column as text, else the 0-based data-row position."""
    if id_column is None:
        return np.fromiter(map(str, range(len(frame))), dtype=object, count=len(frame))
    return label_strings(frame[id_column])


CONTINUOUS_MIN_DISTINCT = 20
"""A float label with at least this many distinct non-whole values looks continuous."""


def check_label_column(values: pd.Series, column: str) -> None:
    """Refuse a label that looks like a measurement rather than classes: floats, most of them
    not whole numbers, with many distinct values (a regression target reviewed as classes
    would give one class per value)."""
    if not pd.api.types.is_float_dtype(values):
        return
    present = values.dropna().to_numpy(dtype=float)
    distinct = np.unique(present)
    fractional = distinct[distinct != np.round(distinct)]
    if len(fractional) >= CONTINUOUS_MIN_DISTINCT and len(fractional) > len(distinct) // 2:
        shown = ", ".join(f"{v:g}" for v in fractional[:3])
        raise InputError(
            f"label column {column!r} looks like a continuous target ({len(distinct):,} "
            f"distinct numbers such as {shown}); margin review ranks class labels. Bin it "
            "into classes first, or pass --treat-as-classes to review every distinct value "
            "as a class"
        )


def prepare_dataset(
    loaded: LoadedTable,
    roles: ColumnRoles | None = None,
    *,
    label: str | None = None,
    id_column: str | None = None,
    overrides: Mapping[str, str] | None = None,
    check_label: bool = False,
) -> Dataset:
    """Roles (given, or inferred from ``label``, ``id_column`` and ``overrides``), features,
    labels and ids of a loaded table. ``check_label`` refuses a label column that looks
    like a continuous target (see `check_label_column`)."""
    if roles is None:
        if label is None:
            raise InputError(f"{loaded.source.path}: choose the label column")
        src = loaded.source
        if label not in loaded.frame.columns and len(src.sheets) > 1:
            others = [s for s in src.sheets if s != src.sheet]
            raise InputError(
                f"{src.path}: label column {label!r} is not on sheet {src.sheet!r}, the one "
                f"read; the workbook also has {', '.join(repr(s) for s in others)} "
                "(choose one with --sheet)"
            )
        roles = infer_roles(loaded.frame, label, id_column, overrides)
    if check_label:
        check_label_column(loaded.frame[roles.label], roles.label)
    X, names = feature_matrix(loaded.frame, roles)
    return Dataset(
        loaded=loaded,
        roles=roles,
        X=X,
        feature_names=names,
        labels=label_strings(loaded.frame[roles.label]),
        ids=row_ids(loaded.frame, roles.id),
    )
