"""`auto`'s choice and the C curve.

The one-standard-error rule is Breiman et al. (1984) and Hastie, Tibshirani & Friedman,
The Elements of Statistical Learning, section 7.10 (the rule itself is common practice).
Reference data: scikit-learn's bundled breast-cancer table; reference scores: scikit-learn's
cross_val_score with SVC on the same folds.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.model_selection import StratifiedKFold, cross_val_score
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC

from reviewer.core.model.tuning import c_curve, one_standard_error_index


def _results(rows: list[tuple[str, float, float, float]]) -> dict:
    """A GridSearchCV-like cv_results_ from (kernel, C, mean, std) with 4 splits."""
    return {
        "params": [{"kernel": k, "C": c} for k, c, _, _ in rows],
        "mean_test_balanced_accuracy": [m for *_, m, _ in rows],
        "std_test_balanced_accuracy": [s for *_, s in rows],
        **{f"split{i}_test_balanced_accuracy": [0.0] * len(rows) for i in range(4)},
    }


def test_the_smallest_c_within_one_standard_error_of_the_best_is_chosen() -> None:
    # Best is C=100 (0.90, se 0.02); C=1 (0.89) is within it, C=0.1 (0.85) is not.
    res = _results(
        [("linear", 0.1, 0.85, 0.04), ("linear", 1.0, 0.89, 0.04), ("linear", 100.0, 0.90, 0.04)]
    )
    assert res["params"][one_standard_error_index(res)]["C"] == 1.0


def test_a_flexible_kernel_must_beat_linear_clearly() -> None:
    close = _results([("linear", 1.0, 0.880, 0.02), ("rbf", 1.0, 0.885, 0.02)])
    assert close["params"][one_standard_error_index(close)]["kernel"] == "linear"
    clear = _results([("linear", 1.0, 0.80, 0.02), ("rbf", 1.0, 0.90, 0.02)])
    assert clear["params"][one_standard_error_index(clear)]["kernel"] == "rbf"


def test_the_c_curve_matches_cross_val_score_on_the_same_folds() -> None:
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    Cs = (0.01, 1.0)
    curve = c_curve(X, y, kernel="linear", Cs=Cs, folds=4, seed=3)
    folds = StratifiedKFold(n_splits=4, shuffle=True, random_state=3)
    for point, C in zip(curve, Cs, strict=True):
        ref = cross_val_score(SVC(kernel="linear", C=C), X, y, cv=folds, scoring="accuracy")
        assert point.accuracy == pytest.approx(np.mean(ref), abs=0.004)
