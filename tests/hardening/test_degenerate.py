"""Degenerate tables: each gives a usable result or a ReviewerError that says what is wrong."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.duplicates import conflicting_duplicates
from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import label_strings
from reviewer.core.data.roles import ColumnRoles, infer_roles
from reviewer.core.errors import InputError, ReviewerError
from reviewer.core.model import engine
from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

LINEAR = FitSettings(kernel="linear", C=1.0, folds=3)


def _two_blobs(n: int = 30, seed: int = 0, overlap: float = 0.0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    half = n // 2
    x = np.r_[rng.normal(-2 + overlap, 1, half), rng.normal(2 - overlap, 1, n - half)]
    z = rng.normal(size=n)
    return pd.DataFrame({"x": x, "z": z, "label": ["a"] * half + ["b"] * (n - half)})


def _fit(frame: pd.DataFrame, settings: FitSettings = LINEAR, **overrides):
    roles = infer_roles(frame, "label", overrides=overrides or None)
    X, _ = feature_matrix(frame, roles)
    return fit_margins(X, label_strings(frame["label"]), settings)


def test_a_single_class_is_refused_naming_the_class() -> None:
    frame = _two_blobs()
    frame["label"] = "only"
    with pytest.raises(InputError, match=r"two classes.*'only'"):
        _fit(frame)


def test_no_labelled_rows_is_refused() -> None:
    frame = _two_blobs()
    frame["label"] = None
    with pytest.raises(ReviewerError, match="no labelled rows"):
        _fit(frame)


def test_a_class_with_one_row_still_ranks_it_and_says_why_heldout_is_empty() -> None:
    frame = _two_blobs(31)
    frame.loc[30, "label"] = "lonely"
    result = _fit(frame)
    lonely = result.rows.iloc[30]
    assert np.isnan(lonely["heldout_margin"])
    assert np.isfinite(lonely["slack"]) and lonely["rank"] >= 1
    assert sorted(result.rows["rank"]) == list(range(1, 32))  # every row ranked once
    assert any("single labelled row" in note for note in result.summary.notes)


def test_all_features_constant_is_refused_with_the_reason() -> None:
    frame = pd.DataFrame({"x": [1.0] * 10, "k": ["same"] * 10, "label": ["a", "b"] * 5})
    with pytest.raises(InputError, match=r"no usable feature.*x: constant.*k: constant"):
        infer_roles(frame, "label")


def test_constant_features_forced_in_give_finite_tied_margins() -> None:
    # A reviewer may insist on using constant columns; nothing separates rows, so all tie.
    frame = pd.DataFrame({"x": [1.0] * 10, "k": ["same"] * 10, "label": ["a", "b"] * 5})
    result = _fit(frame, x="numeric", k="categorical")
    margin = result.rows["margin"].to_numpy()
    assert np.isfinite(margin).all()
    assert np.allclose(margin[::2], margin[0]) and np.allclose(margin[1::2], margin[1])


def test_a_column_of_only_missing_values_is_ignored_with_reason_and_fit_proceeds() -> None:
    frame = _two_blobs()
    frame["empty"] = np.nan
    roles = infer_roles(frame, "label")
    assert roles.ignored["empty"] == "all values missing"
    assert "empty" not in roles.features
    result = _fit(frame)
    assert np.isfinite(result.rows["slack"]).all()
    # Forced in as a number, it becomes an all-zero column and does no harm.
    forced = _fit(frame, empty="numeric")
    assert np.allclose(forced.rows["margin"], result.rows["margin"], atol=1e-6)


def test_conflicting_duplicates_are_reported_as_groups() -> None:
    frame = pd.DataFrame(
        {
            "x": [1.0, 2.0, 1.0, 3.0, 1.0, np.nan, np.nan, 2.0],
            "k": ["p", "q", "p", "r", "p", None, None, "q"],
            "note": ["n1", "n2", "n3", "n4", "n5", "n6", "n7", "n8"],
        }
    )
    roles = ColumnRoles(label="label", id=None, numeric=["x"], categorical=["k"])
    labels = ["a", "a", "b", "a", "a", "a", "b", "a"]
    # Rows 0, 2, 4 share features with labels a, b, a; 5 and 6 share missing values with
    # a and b; 1 and 7 agree on their label, so they are not a conflict; 'note' is ignored.
    assert conflicting_duplicates(frame, roles, labels) == [[0, 2, 4], [5, 6]]
    # An unlabelled twin is no conflict.
    assert conflicting_duplicates(frame, roles, [*labels[:6], None, "a"]) == [[0, 2, 4]]
    assert conflicting_duplicates(frame, roles, ["a"] * 8) == []


def test_conflicting_duplicates_refuses_mismatched_labels() -> None:
    frame = pd.DataFrame({"x": [1.0, 1.0]})
    roles = ColumnRoles(label="label", id=None, numeric=["x"])
    with pytest.raises(InputError, match="3 labels given for a table of 2 rows"):
        conflicting_duplicates(frame, roles, ["a", "b", "c"])


def test_duplicated_rows_with_different_labels_cost_slack_in_the_fit() -> None:
    frame = _two_blobs(30)
    twin = frame.iloc[[3]].assign(label="b")  # same features as row 3, other label
    frame = pd.concat([frame, twin], ignore_index=True)
    roles = infer_roles(frame, "label")
    labels = label_strings(frame["label"])
    assert conflicting_duplicates(frame, roles, labels) == [[3, 30]]
    X, _ = feature_matrix(frame, roles)
    result = fit_margins(X, labels, LINEAR)
    pair = result.rows.iloc[[3, 30]]
    # Identical inputs get one decision value, so the two margins are opposite: at least
    # one of the pair is on the wrong side or on the boundary (slack >= 1).
    assert pair["margin"].sum() == pytest.approx(0.0, abs=1e-9)
    assert pair["slack"].max() >= 1.0 - 1e-9


def test_more_columns_than_rows() -> None:
    rng = np.random.default_rng(1)
    n, p = 12, 300
    data = rng.normal(size=(n, p))
    frame = pd.DataFrame(data, columns=[f"f{i}" for i in range(p)])
    frame["label"] = ["a", "b"] * (n // 2)
    result = _fit(frame)
    rows = result.rows
    assert np.isfinite(rows["margin"]).all() and np.isfinite(rows["heldout_margin"]).all()
    # With more dimensions than rows a linear boundary separates any labelling: training
    # slack is (near) zero while held-out slack stays large. (Cover's counting argument.)
    assert rows["slack"].max() < 1e-2
    assert rows["heldout_slack"].mean() > 0.5


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
@pytest.mark.parametrize("C", [1e-6, 1e6])
def test_extreme_C_finishes_with_finite_slack(kernel: str, C: float) -> None:
    frame = _two_blobs(40, seed=3, overlap=1.5)
    result = _fit(frame, FitSettings(kernel=kernel, C=C, folds=2))
    for col in ("margin", "slack", "heldout_slack", "alpha"):
        assert np.isfinite(result.rows[col]).all(), col
    assert result.settings.C == C
    if C == 1e-6:
        # A tiny C puts every row at its bound with slack near 1 (f is close to constant).
        assert (result.rows["support"] == "bound_support").all()


def test_a_capped_solver_reports_it_did_not_converge(monkeypatch) -> None:
    frame = _two_blobs(60, seed=5, overlap=2.0)  # heavily overlapping classes
    monkeypatch.setattr(engine, "MAX_ITER", 3)
    result = _fit(frame, FitSettings(kernel="rbf", C=100.0, folds=0))
    (problem,) = result.summary.problems
    assert problem["converged"] is False
    assert any("iteration limit (3 iterations)" in note for note in result.summary.notes)
    assert np.isfinite(result.rows["slack"]).all()


def test_an_uncapped_solver_converges_and_adds_no_note() -> None:
    frame = _two_blobs(60, seed=5, overlap=2.0)
    result = _fit(frame, FitSettings(kernel="rbf", C=100.0, folds=0))
    assert result.summary.problems[0]["converged"] is True
    assert not any("iteration limit" in note for note in result.summary.notes)
