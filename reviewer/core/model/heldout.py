"""Held-out decision values by stratified K-fold cross-fitting.

A flexible kernel with a large C can bend around a wrong label and give it slack 0 in
training; a model that never saw the row has no such blind spot.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, clone
from sklearn.model_selection import StratifiedKFold

from reviewer.core.progress import Reporter

FoldFeatures = Callable[[np.ndarray, np.ndarray], tuple[Any, Any]]
"""(train, test) row positions -> (train matrix, test matrix), built from the train rows."""


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
) -> tuple[np.ndarray, list[str]]:
    """(n, K) out-of-fold decision values; NaN for a class absent from a fold's training rows.

    Each fold fits ``clone(estimator)``. ``fold_features(train, test)``, when given, builds
    the fold's (train, test) matrices from positions into X's rows, so features whose
    statistics come from the data (a text column's vocabulary and idf) are learned from the
    fold's training rows alone; without it the fold uses rows of X.

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
    for i, (train, test) in enumerate(splits):
        sub = report.slice(i / k, (i + 1) / k)
        sub(0.0, f"held-out fold {i + 1} of {k}")
        present = np.unique(y_idx[train])
        if len(present) < 2:
            continue
        if fold_features is None:
            X_train, X_test = X[train], X[test]
        else:
            X_train, X_test = fold_features(train, test)
        model = clone(estimator)
        # Fit on class indices so a missing class maps back to the right column.
        model.fit(X_train, y_idx[train], report=sub)
        F = model.decision_matrix(X_test)
        cols = model.classes_.astype(int)
        block = np.full((len(test), n_classes), np.nan)
        if len(cols) == 2 and n_classes > 2:
            # A two-class fold model gives (-f, f); halve so own minus rival is f, as with K = 2.
            F = F / 2.0
        block[:, cols] = F
        out[test] = block
    return out, notes
