"""Held-out decision values by stratified K-fold cross-fitting.

A flexible kernel with a large C can bend around a wrong label and give it slack 0 in
training; a model that never saw the row has no such blind spot.
"""

from __future__ import annotations

import threading
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from scipy import sparse
from sklearn.base import BaseEstimator, clone
from sklearn.model_selection import StratifiedKFold

from reviewer.core.model.parallel import resolve_jobs, run_tasks
from reviewer.core.progress import Reporter

FoldFeatures = Callable[[np.ndarray, np.ndarray], tuple[Any, Any]]
"""(train, test) row positions -> (train matrix, test matrix), built from the train rows."""
WarmStart = dict[int, tuple[np.ndarray, float]]
"""Class index -> (w, b) of the full fit's problem for that class (its starting point)."""

SPARSE_FOLDS_MEMORY = 1_000_000_000
"""Bytes that the matrices of the held-out folds running at once may take, for sparse
(text) X; see fold_jobs."""


def fold_jobs(X: Any, jobs: int | None) -> int:
    """Threads for the held-out folds on this machine: ``jobs`` (None: every usable core),
    but for a sparse X no more folds at once than fit in SPARSE_FOLDS_MEMORY.

    A fold holds its own train and test matrices, together about X's size (8 bytes of value
    and 4 of column index per stored value), and its solver works on them; two folds at
    once hold two such copies. So a sparse X whose stored values take more than half of
    SPARSE_FOLDS_MEMORY runs its folds one at a time: a 200,000-row text table of 50 words
    a row (109 million stored values, 1.3 GB a fold) does, while a few thousand rows still
    use every core (tests/benchmarks/results/text_memory.md). Dense folds are unchanged.
    """
    n_jobs = resolve_jobs(jobs)
    if n_jobs == 1 or not sparse.issparse(X):
        return n_jobs
    fold_bytes = X.data.nbytes + X.indices.nbytes + X.indptr.nbytes
    return max(1, min(n_jobs, SPARSE_FOLDS_MEMORY // max(fold_bytes, 1)))


def effective_folds(y_idx: np.ndarray, folds: int) -> tuple[int, list[str]]:
    """Folds actually used and warnings: a class smaller than K lowers K (never below 2)."""
    counts = np.bincount(y_idx)
    counts = counts[counts > 0]
    notes: list[str] = []
    smallest = int(counts.min())
    k = folds
    if smallest < folds:
        k = max(2, smallest)
        if k < folds:
            notes.append(
                f"the smallest class has {smallest} row(s); "
                f"held-out folds lowered from {folds} to {k}"
            )
    if smallest < 2:
        notes.append(
            "a class with a single labelled row cannot be held out against itself; "
            "its held-out margin is left empty"
        )
    return k, notes


def heldout_decision(
    X: np.ndarray,
    y_idx: np.ndarray,
    n_classes: int,
    estimator: BaseEstimator,
    folds: int,
    seed: int,
    report: Reporter | None = None,
    fold_features: FoldFeatures | None = None,
    *,
    jobs: int | None = 1,
    cluster: str | None = None,
    warm_start: WarmStart | None = None,
    predicted_seconds: float | None = None,
) -> tuple[np.ndarray, list[str]]:
    """(n, K) out-of-fold decision values; NaN for a class absent from a fold's training rows.

    Each fold fits ``clone(estimator)``. ``fold_features(train, test)``, when given, builds
    the fold's (train, test) matrices from positions into X's rows, so features whose
    statistics come from the data (a text column's vocabulary and idf) are learned from the
    fold's training rows alone; without it the fold uses rows of X.

    The folds are independent fits: ``jobs`` runs them on that many threads (``None``: every
    usable core; fewer for a large sparse X, see fold_jobs), ``cluster`` on a Dask
    scheduler's workers (see parallel.run_tasks); the values are the same whichever.
    ``warm_start`` maps a class index to the (w, b) of the full fit's problem for that
    class, the starting point of a fold's primal solve.
    ``predicted_seconds`` (of all folds, serial) keeps a tiny problem on one thread.

    The loop is ours rather than cross_val_predict's so a long fit reports progress per fold,
    honours a cancel between folds, and leaves NaN (not an error) for a class that a fold's
    training rows lack.
    """
    report = report or Reporter()
    k, notes = effective_folds(y_idx, folds)
    out = np.full((len(y_idx), n_classes), np.nan)
    splitter = StratifiedKFold(n_splits=k, shuffle=True, random_state=seed)
    with warnings.catch_warnings():
        # We already warned in our own words about classes smaller than the fold count.
        warnings.simplefilter("ignore", UserWarning)
        splits = list(splitter.split(np.zeros(len(y_idx)), y_idx))
    report(0.0, f"held-out fold 1 of {k}")
    blocks = run_tasks(
        fold_block,
        # The user's cancel reaches fits on this machine between class problems; an Event
        # cannot travel to a cluster, whose folds are cancelled between folds only.
        (
            X,
            y_idx,
            n_classes,
            estimator,
            fold_features,
            warm_start,
            report.cancel if cluster is None else None,
        ),
        [(train, test) for train, test in splits],
        jobs=fold_jobs(X, jobs) if cluster is None else jobs,
        cluster=cluster,
        predicted_seconds=predicted_seconds,
        report=report,
        message=lambda done, total: f"held-out folds: {done} of {total} done",
    )
    for (_train, test), block in zip(splits, blocks, strict=True):
        if block is not None:
            out[test] = block
    return out, notes


def fold_block(
    X: Any,
    y_idx: np.ndarray,
    n_classes: int,
    estimator: BaseEstimator,
    fold_features: FoldFeatures | None,
    warm_start: WarmStart | None,
    cancel: threading.Event | None,
    train: np.ndarray,
    test: np.ndarray,
) -> np.ndarray | None:
    """One fold: fit on ``train``, the (len(test), K) decision block of ``test`` (None when
    the fold's training rows hold a single class)."""
    present = np.unique(y_idx[train])
    if len(present) < 2:
        return None
    if fold_features is None:
        X_train, X_test = X[train], X[test]
    else:
        X_train, X_test = fold_features(train, test)
    model = clone(estimator)
    # Fit on class indices so a missing class maps back to the right column.
    init = warm_start if len(present) == n_classes else None
    model.fit(X_train, y_idx[train], report=Reporter(None, cancel), init=init)
    del X_train  # the model keeps no reference: free it before scoring
    F = model.decision_matrix(X_test)
    del X_test
    cols = model.classes_.astype(int)
    block = np.full((len(test), n_classes), np.nan)
    if len(cols) == 2 and n_classes > 2:
        # A two-class fold model gives (-f, f); halve so own minus rival is f, as with K = 2.
        F = F / 2.0
    block[:, cols] = F
    return block
