"""fit_margins: what is fitted, how rows rank, and how small classes and bad settings behave."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.svm import SVC

from reviewer.core.errors import InputError, SettingsError
from reviewer.core.model.fitting import fit_margins, ranks_from_score
from reviewer.core.model.heldout import effective_folds
from reviewer.core.values import FitSettings


def _blobs(n: int = 90, k: int = 3, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    y = np.arange(n) % k
    X = rng.normal(size=(n, 2)) + 3.0 * np.column_stack([np.cos(y * 2.1), np.sin(y * 2.1)])
    return X, np.array([f"c{v}" for v in y], dtype=object)


def test_one_result_row_per_input_row_and_ranks_follow_score() -> None:
    X, labels = _blobs()
    labels[[4, 10]] = labels[[5, 11]]  # two wrong labels
    rows = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=3)).rows
    assert len(rows) == len(labels)
    order = rows.sort_values("rank")
    assert order["rank"].tolist() == list(range(1, len(rows) + 1))
    assert (np.diff(order["score"].to_numpy()) <= 0).all()
    assert set(np.flatnonzero(rows["rank"].to_numpy() <= 4)) >= {4, 10}
    np.testing.assert_allclose(rows["score"], -rows["heldout_margin"])


def test_excluded_row_is_scored_by_a_model_that_never_saw_it() -> None:
    X, labels = _blobs()
    excluded = np.zeros(len(labels), dtype=bool)
    excluded[7] = True
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=0), excluded=excluded)
    assert result.summary.n_fitted == len(labels) - 1
    assert result.summary.n_left_out == 1
    assert np.isnan(result.rows.loc[7, "alpha"])
    # reference: scikit-learn SVC fitted without row 7, one class against the rest
    keep = ~excluded
    F = [
        SVC(kernel="linear", C=1.0, tol=1e-8)
        .fit(X[keep], np.where(labels[keep] == c, 1.0, -1.0))
        .decision_function(X[7:8])[0]
        for c in ("c0", "c1", "c2")
    ]
    own = F[int(labels[7][1])]
    rival = max(v for j, v in enumerate(F) if j != int(labels[7][1]))
    assert result.rows.loc[7, "margin"] == pytest.approx(own - rival, abs=1e-3)


def test_training_score_uses_training_margin() -> None:
    X, labels = _blobs()
    rows = fit_margins(X, labels, FitSettings(kernel="rbf", C=1.0, score="training")).rows
    np.testing.assert_allclose(rows["score"], -rows["margin"])
    assert rows["heldout_margin"].notna().all()


def test_ranks_break_ties_by_tie_break_then_position() -> None:
    # fit_margins passes -margin as tie_break: among equal scores the lower margin ranks first.
    score = np.array([1.0, 2.0, 2.0, np.nan, 2.0])
    tie = np.array([0.0, 0.5, -0.5, 0.0, -0.5])
    assert ranks_from_score(score, tie_break=tie).tolist() == [4, 1, 2, 0, 3]


def test_small_class_lowers_folds_with_a_note() -> None:
    X, labels = _blobs(n=60, k=2)
    labels[:] = "big"
    labels[[0, 1]] = "tiny"
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=5))
    assert any("lowered from 5 to 2" in note for note in result.summary.notes)
    assert result.rows["heldout_margin"].notna().all()


def test_single_row_class_gets_empty_heldout_margin() -> None:
    X, labels = _blobs(n=60, k=2)
    labels[:] = "big"
    labels[0] = "lonely"
    labels[30:] = "other"
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=5))
    notes = " ".join(result.summary.notes)
    assert "single labelled row" in notes
    assert np.isnan(result.rows.loc[0, "heldout_margin"])
    # its score falls back to the training margin, so it is still ranked
    assert result.rows.loc[0, "score"] == pytest.approx(-result.rows.loc[0, "margin"])
    assert result.rows.loc[0, "rank"] > 0
    assert np.isfinite(result.rows.loc[1:, "heldout_margin"]).all()
    assert effective_folds(np.array([0] * 10 + [1] * 3), 5)[0] == 3


@pytest.mark.parametrize(
    ("field", "value"),
    [("C", -1.0), ("C", 0.0), ("kernel", "sigmoid"), ("folds", 1), ("gamma", -2.0), ("score", "x")],
)
def test_bad_settings_are_refused_by_name(field: str, value: object) -> None:
    X, labels = _blobs(n=30)
    with pytest.raises(SettingsError, match=field if field != "folds" else "folds"):
        fit_margins(X, labels, FitSettings(**{field: value}))


def test_one_class_is_refused() -> None:
    X, _ = _blobs(n=20)
    with pytest.raises(InputError, match=r"two classes.*'only'"):
        fit_margins(X, np.array(["only"] * 20, dtype=object), FitSettings(kernel="linear"))


def test_auto_reports_what_it_chose() -> None:
    X, labels = _blobs(n=120)
    result = fit_margins(X, labels, FitSettings())
    assert result.settings.kernel in ("linear", "rbf")
    assert result.summary.candidates
    assert result.summary.notes[0].startswith("auto chose")
