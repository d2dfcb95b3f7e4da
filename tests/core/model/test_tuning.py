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


def test_auto_scores_every_candidate_as_grid_search_cv_does() -> None:
    # Reference: scikit-learn's GridSearchCV with our estimator on the same stratified folds,
    # scored by balanced accuracy; auto computes the same scores fold by fold, its own way.
    from sklearn.metrics import balanced_accuracy_score, make_scorer
    from sklearn.model_selection import GridSearchCV

    from reviewer.core.model.engine import SoftMarginClassifier, resolve_gamma
    from reviewer.core.model.tuning import LINEAR_CS, RBF_GAMMA_FACTORS, choose_settings

    rng = np.random.default_rng(5)
    y = rng.integers(0, 3, 240)
    X = rng.normal(size=(240, 4)) + np.eye(3, 4)[y] * 1.5
    rbf_cs = (0.1, 10.0)
    best, tried = choose_settings(X, y, seed=2, rbf_cs=rbf_cs, jobs=2)
    base = resolve_gamma("scale", X)
    grid = [
        {"kernel": ["linear"], "C": list(LINEAR_CS)},
        {"kernel": ["rbf"], "C": list(rbf_cs), "gamma": [base * f for f in RBF_GAMMA_FACTORS]},
    ]
    search = GridSearchCV(
        SoftMarginClassifier(),
        grid,
        scoring=make_scorer(balanced_accuracy_score),
        cv=StratifiedKFold(n_splits=3, shuffle=True, random_state=2),
    ).fit(X, y)
    ref = search.cv_results_
    assert len(tried) == len(ref["params"])
    for cand, params, mean in zip(tried, ref["params"], ref["mean_test_score"], strict=True):
        assert (cand.kernel, cand.C) == (params["kernel"], params["C"])
        assert cand.balanced_accuracy == pytest.approx(mean, abs=1e-9)
    assert best in tried
