"""Turn a table into a feature matrix with scikit-learn's own transformers.

Numeric and categorical columns go through one ``ColumnTransformer`` (the dense step);
vector columns and a vectors file add standardised dense blocks; text columns add TF-IDF
blocks (``text.py``). X is a dense float64 array without text, else a CSR matrix.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import sparse
from sklearn.compose import ColumnTransformer
from sklearn.impute import SimpleImputer
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import (
    FunctionTransformer,
    MaxAbsScaler,
    OneHotEncoder,
    StandardScaler,
)

from reviewer.core.data.roles import ColumnRoles
from reviewer.core.data.text import TextCounts, long_cells_note, read_text_columns, row_chunks
from reviewer.core.data.vectors import VECTORS_FILE_NAME, column_vectors, standardise
from reviewer.core.errors import InputError

MISSING_CATEGORY = "(missing)"


def _as_float(frame: pd.DataFrame) -> np.ndarray:
    """Numbers as float64; text that does not parse and infinities become missing."""
    cols = [pd.to_numeric(frame[c], errors="coerce") for c in frame.columns]
    out = np.column_stack([c.to_numpy(dtype=float, na_value=np.nan) for c in cols])
    out[~np.isfinite(out)] = np.nan
    return out


def _as_text(frame: pd.DataFrame) -> np.ndarray:
    out = frame.astype(object).to_numpy(copy=True)
    missing = pd.isna(out)
    out = out.astype(str)
    out[missing] = MISSING_CATEGORY
    return out.astype(object)


def build_feature_transformer(roles: ColumnRoles) -> ColumnTransformer:
    """Numeric: median-impute then standardise; categorical: one-hot, unknown levels ignored."""
    parts = []
    if roles.numeric:
        numeric = Pipeline(
            [
                ("to_float", FunctionTransformer(_as_float, feature_names_out="one-to-one")),
                # Values near 1e308 overflow the median and variance; dividing by each
                # column's largest magnitude first leaves the standardised result unchanged.
                ("bound", MaxAbsScaler()),
                ("impute", SimpleImputer(strategy="median", keep_empty_features=True)),
                ("scale", StandardScaler()),
            ]
        )
        parts.append(("numeric", numeric, list(roles.numeric)))
    if roles.categorical:
        categorical = Pipeline(
            [
                ("to_text", FunctionTransformer(_as_text, feature_names_out="one-to-one")),
                (
                    "one_hot",
                    OneHotEncoder(handle_unknown="ignore", sparse_output=False, dtype=np.float64),
                ),
            ]
        )
        parts.append(("categorical", categorical, list(roles.categorical)))
    return ColumnTransformer(parts, remainder="drop", verbose_feature_names_out=False)


def dense_step(frame: pd.DataFrame, roles: ColumnRoles) -> tuple[np.ndarray, list[str]]:
    """The numeric and categorical columns through `build_feature_transformer`."""
    if not (roles.numeric or roles.categorical):
        return np.empty((len(frame), 0)), []
    transformer = build_feature_transformer(roles)
    X = transformer.fit_transform(frame)
    X = np.ascontiguousarray(X, dtype=np.float64)
    names = [str(n) for n in transformer.get_feature_names_out()]
    bad = ~np.isfinite(X).all(axis=0)
    if bad.any():
        shown = ", ".join(repr(names[i]) for i in np.flatnonzero(bad)[:5])
        raise InputError(f"feature column(s) {shown} could not be scaled to finite numbers")
    return X, names


def vector_step(
    frame: pd.DataFrame, roles: ColumnRoles, vectors: np.ndarray | None = None
) -> tuple[np.ndarray, list[str]]:
    """Vector columns ("{col}[{j}]") and a vectors file ("vectors[{j}]"), standardised."""
    blocks: list[np.ndarray] = []
    names: list[str] = []
    for col in roles.vector:
        block = column_vectors(frame[col], col)
        blocks.append(standardise(block))
        names += [f"{col}[{j}]" for j in range(block.shape[1])]
    if vectors is not None:
        blocks.append(standardise(np.asarray(vectors, dtype=np.float64)))
        names += [f"{VECTORS_FILE_NAME}[{j}]" for j in range(vectors.shape[1])]
    if not blocks:
        return np.empty((len(frame), 0)), []
    return np.hstack(blocks), names


@dataclass
class Features:
    X: np.ndarray | sparse.csr_matrix
    names: list[str]
    fold_features: TextFolds | None = None
    """None without a text column; else (train, test) -> matrices fitted on train rows."""
    notes: list[str] = field(default_factory=list)


class TextFolds:
    """(train, test) row positions -> (X_train, X_test): the dense blocks as they are, the
    text blocks' vocabulary and idf learned from the train rows alone."""

    def __init__(self, dense: np.ndarray, texts: Sequence[TextCounts]) -> None:
        self.dense = dense
        self.texts = list(texts)

    def matrices(
        self, train: np.ndarray | None, apply: Sequence[np.ndarray | None]
    ) -> list[sparse.csr_matrix]:
        """One matrix per entry of ``apply`` (row positions; None = every row) with the
        text vocabularies of ``train`` (None = every row)."""
        learned = [t.vocabulary(train) for t in self.texts]
        n = len(self.dense)
        return [
            self._assemble(np.arange(n) if rows is None else np.asarray(rows), learned)
            for rows in apply
        ]

    def _chunk(self, rows: np.ndarray, learned: list) -> sparse.csr_matrix:
        parts = [sparse.csr_matrix(self.dense[rows])] if self.dense.shape[1] else []
        for t, (keep, idf) in zip(self.texts, learned, strict=True):
            parts.append(t.tfidf(rows, keep, idf))
        return _hstack(parts, len(rows))

    def _assemble(self, rows: np.ndarray, learned: list) -> sparse.csr_matrix:
        """The rows' matrix built a slice of rows at a time into arrays sized once, so the
        peak is the finished matrix plus one slice (not the blocks and their copy)."""
        chunks = row_chunks(rows)
        if len(chunks) == 1:
            return self._chunk(rows, learned)
        width = self.dense.shape[1] + sum(len(k) for k, _ in learned)
        # First pass: non-zeros per row (cheap: no TF-IDF arithmetic), to size the arrays.
        row_nnz = np.zeros(len(rows), dtype=np.int64)
        at = 0
        for chunk in chunks:
            counted = np.count_nonzero(self.dense[chunk], axis=1).astype(np.int64)
            for t, (keep, _) in zip(self.texts, learned, strict=True):
                counted += t.kept_per_row(chunk, keep)
            row_nnz[at : at + len(chunk)] = counted
            at += len(chunk)
        indptr = np.zeros(len(rows) + 1, dtype=np.int64)
        np.cumsum(row_nnz, out=indptr[1:])
        total = int(indptr[-1])
        index_type = np.int32 if max(total, width) < np.iinfo(np.int32).max else np.int64
        data = np.empty(total, dtype=np.float64)
        indices = np.empty(total, dtype=index_type)
        at = 0
        for chunk in chunks:
            block = self._chunk(chunk, learned)
            start, stop = indptr[at], indptr[at + len(chunk)]
            data[start:stop] = block.data
            indices[start:stop] = block.indices
            at += len(chunk)
        return sparse.csr_matrix(
            (data, indices, indptr.astype(index_type)), shape=(len(rows), width)
        )

    def names(self, dense_names: list[str]) -> list[str]:
        names = list(dense_names)
        for t in self.texts:
            names += t.names(t.vocabulary()[0])
        return names

    def __call__(
        self, train: np.ndarray, test: np.ndarray
    ) -> tuple[sparse.csr_matrix, sparse.csr_matrix]:
        X_train, X_test = self.matrices(np.asarray(train), [train, test])
        return X_train, X_test


def _hstack(parts: list[sparse.csr_matrix], n_rows: int) -> sparse.csr_matrix:
    if not parts:
        return sparse.csr_matrix((n_rows, 0), dtype=np.float64)
    if len(parts) == 1:
        return parts[0].tocsr()
    X = sparse.hstack(parts, format="csr", dtype=np.float64)
    return sparse.csr_matrix(X)


def build_features(
    frame: pd.DataFrame, roles: ColumnRoles, vectors: np.ndarray | None = None
) -> Features:
    """Every feature of the table (and of a vectors file matched by row order), with the
    per-fold rebuild when there is text."""
    dense, names = dense_step(frame, roles)
    extra, extra_names = vector_step(frame, roles, vectors)
    if extra.shape[1]:
        dense = np.hstack([dense, extra]) if dense.shape[1] else extra
        names = names + extra_names
    if not roles.text:
        return Features(np.ascontiguousarray(dense, dtype=np.float64), names)
    folds = TextFolds(dense, read_text_columns(frame, roles.text))
    (X,) = folds.matrices(None, [None])
    names = folds.names(names)
    if X.shape[1] == 0:
        shown = ", ".join(map(repr, roles.text))
        raise InputError(
            f"text column(s) {shown} give no word or character n-gram found in two or more "
            "rows, and there is no other feature"
        )
    return Features(X, names, folds, long_cells_note(frame, roles.text))


def feature_matrix(
    frame: pd.DataFrame, roles: ColumnRoles, vectors: np.ndarray | None = None
) -> tuple[np.ndarray | sparse.csr_matrix, list[str]]:
    """Fit the features on the whole table and return (X, feature names)."""
    built = build_features(frame, roles, vectors)
    return built.X, built.names
