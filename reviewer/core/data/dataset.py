"""One prepared data set: the loaded table, its roles, its feature matrix, labels and ids.

Opening a session, a scan and a probe all start from here, so they read a table the same
way: load, decide roles, build features, read the labels as text, name every row.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from scipy import sparse

from reviewer.core.data.features import build_features
from reviewer.core.data.loading import LoadedTable, label_strings
from reviewer.core.data.roles import ColumnRoles, infer_roles
from reviewer.core.data.vectors import load_vectors_file
from reviewer.core.errors import InputError

Vectors = str | os.PathLike[str] | np.ndarray
"""A ``.npy`` file of shape (rows, d), or such an array, matched to the table by row order."""


@dataclass
class Dataset:
    loaded: LoadedTable
    roles: ColumnRoles
    X: np.ndarray | sparse.csr_matrix  # CSR when there is a text column
    feature_names: list[str]
    labels: np.ndarray  # the label column as text, None where missing
    ids: np.ndarray  # the id column as text, else the 0-based data-row position
    fold_features: Callable[[np.ndarray, np.ndarray], tuple[Any, Any]] | None = None
    """None without a text column; else (train, test) row positions -> (X_train, X_test)
    with the text vocabulary and idf learned from the train rows only."""
    vectors_path: Path | None = None  # the .npy vectors file, when one was given
    vectors_sha256: str | None = None
    notes: list[str] = field(default_factory=list)  # what the reader should know

    @property
    def frame(self) -> pd.DataFrame:
        return self.loaded.frame


def row_ids(frame: pd.DataFrame, id_column: str | None) -> np.ndarray:
    """The id column as text, else the 0-based data-row position."""
    if id_column is None:
        return np.arange(len(frame)).astype(str).astype(object)
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
    vectors: Vectors | None = None,
) -> Dataset:
    """Roles (given, or inferred from ``label``, ``id_column`` and ``overrides``), features,
    labels and ids of a loaded table. ``check_label`` refuses a label column that looks
    like a continuous target (see `check_label_column`). ``vectors`` (a .npy file or an
    array, one row per table row) adds the features vectors[0], vectors[1], ..."""
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
        roles = infer_roles(
            loaded.frame, label, id_column, overrides, require_features=vectors is None
        )
    if check_label:
        check_label_column(loaded.frame[roles.label], roles.label)
    array, path, digest = read_vectors(vectors, len(loaded.frame))
    built = build_features(loaded.frame, roles, array)
    return Dataset(
        loaded=loaded,
        roles=roles,
        X=built.X,
        feature_names=built.names,
        labels=label_strings(loaded.frame[roles.label]),
        ids=row_ids(loaded.frame, roles.id),
        fold_features=built.fold_features,
        vectors_path=path,
        vectors_sha256=digest,
        notes=built.notes,
    )


def read_vectors(
    vectors: Vectors | None, n_rows: int
) -> tuple[np.ndarray | None, Path | None, str | None]:
    """(array, file path, its SHA-256) of the vectors given as a file or an array."""
    if vectors is None:
        return None, None, None
    if isinstance(vectors, np.ndarray):
        if vectors.ndim != 2 or vectors.shape[0] != n_rows:
            raise InputError(
                f"vectors: expected an array of shape ({n_rows:,}, d), one row per table "
                f"row; got shape {vectors.shape}"
            )
        if not np.issubdtype(vectors.dtype, np.number) or np.iscomplexobj(vectors):
            raise InputError(f"vectors: must be real numbers; the array holds {vectors.dtype}")
        array = np.asarray(vectors, dtype=np.float64)
        if not np.isfinite(array).all():
            rows = np.flatnonzero(~np.isfinite(array).all(axis=1))
            raise InputError(
                f"vectors: NaN or infinity in row(s) {', '.join(map(str, rows[:5]))}; "
                "every element must be a finite number"
            )
        return array, None, None
    if not isinstance(vectors, (str, os.PathLike)):
        raise InputError(
            f"vectors: expected a .npy file path or a numpy array, got {type(vectors).__name__}"
        )
    array, digest = load_vectors_file(vectors, n_rows)
    return array, Path(vectors).expanduser().resolve(), digest
