"""The numbers behind the plots: downsampling, histogram bins, C curve, before/after, reference."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.model_selection import StratifiedKFold, cross_val_score
from sklearn.svm import SVC

from reviewer.core.model.engine import SoftMarginClassifier
from reviewer.core.model.fitting import fit_margins
from reviewer.core.model.tuning import c_curve_for_labels
from reviewer.core.review import plotdata
from reviewer.core.review.compare import compare_fits, score_on_reference
from reviewer.core.values import FitSettings


def test_downsampling_keeps_every_suspect_and_reviewed_row_and_caps_the_count() -> None:
    rng = np.random.default_rng(3)
    n = 200_000
    zones = rng.choice(
        np.array(["clear", "inside_margin", "wrong_side", ""], dtype=object),
        n,
        p=[0.9, 0.05, 0.03, 0.02],
    )
    review = np.zeros(n, dtype=np.int8)
    review[rng.choice(n, 500, replace=False)] = rng.integers(1, 4, 500)
    coords = rng.normal(size=(n, 2))
    labels = rng.choice(np.array(["a", "b"], dtype=object), n)
    pts = plotdata.projection_points(
        coords, np.array([0.6, 0.3]), labels, zones, review, limit=20_000
    )
    must = np.flatnonzero(np.isin(zones, ["wrong_side", "inside_margin"]) | (review != 0))
    assert len(pts.rows) == 20_000
    assert set(must) <= set(pts.rows)
    assert len(np.unique(pts.rows)) == len(pts.rows)
    # Coordinates and classes travel with their row.
    np.testing.assert_array_equal(pts.x, coords[pts.rows, 0])
    np.testing.assert_array_equal(pts.class_code, (labels[pts.rows] == "b").astype(int))
    # Suspects are drawn last, on top of the others.
    first_suspect = np.argmax(pts.suspect)
    assert pts.suspect[first_suspect:].all()


def test_downsampling_keeps_reviewed_rows_even_beyond_the_limit() -> None:
    always = np.zeros(1000, dtype=bool)
    always[::2] = True
    rows = plotdata.downsample_rows(np.zeros(1000, dtype=bool), limit=100, always=always)
    np.testing.assert_array_equal(rows, np.flatnonzero(always))
    np.testing.assert_array_equal(
        plotdata.downsample_rows(always, limit=5000, always=always), np.arange(1000)
    )


def test_when_suspects_overflow_the_budget_the_most_suspect_are_drawn() -> None:
    rng = np.random.default_rng(5)
    n = 100_000
    zones = np.where(rng.random(n) < 0.3, "wrong_side", "clear").astype(object)
    score = rng.normal(size=n)
    review = np.zeros(n, dtype=np.int8)
    review[:50] = 1  # reviewed rows, whatever their score
    coords = rng.normal(size=(n, 2))
    labels = np.full(n, "a", dtype=object)
    pts = plotdata.projection_points(
        coords, np.array([0.5, 0.2]), labels, zones, review, limit=5_000, score=score
    )
    assert len(pts.rows) == 5_000
    assert set(range(50)) <= set(pts.rows)
    suspects = np.flatnonzero((zones == "wrong_side") & (review == 0))
    top = suspects[np.argsort(-score[suspects])[: 5_000 - 50]]
    # Every drawn suspect outside the reviewed rows is among the highest-scoring ones.
    assert set(pts.rows) - set(range(50)) == set(top)


def test_histogram_counts_equal_numpy_histogram() -> None:
    rng = np.random.default_rng(0)
    slack = np.concatenate([np.zeros(500), rng.exponential(0.7, 800), [np.nan] * 7])
    mask = rng.random(len(slack)) < 0.6
    h = plotdata.slack_histogram(slack, mask, bins=25)
    s = slack[mask]
    s = s[np.isfinite(s)]
    # numpy.histogram as the reference for the bins of the non-zero slacks.
    ref, ref_edges = np.histogram(s[s > 0], bins=25, range=(0.0, max(2.0, s.max())))
    np.testing.assert_array_equal(h.counts, ref)
    np.testing.assert_allclose(h.edges, ref_edges)
    assert h.n_zero == int(np.sum(s == 0))
    assert h.n_missing == int(np.sum(np.isnan(slack[mask])))
    assert h.counts.sum() + h.n_zero + h.n_missing == mask.sum()
    full = plotdata.slack_histogram(slack, bins=25, skip_zero=False)
    assert full.counts[0] >= 500


def test_slack_above_is_strict_and_ignores_missing() -> None:
    s = np.array([0.0, 0.5, 1.0, 1.5, np.nan])
    np.testing.assert_array_equal(plotdata.slack_above(s, 1.0), [False, False, False, True, False])


def _two_blobs(n: int = 160, seed: int = 1) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = np.vstack([rng.normal(-1, 1, (n // 2, 2)), rng.normal(1, 1, (n // 2, 2))])
    y = np.array(["no"] * (n // 2) + ["yes"] * (n // 2), dtype=object)
    return X, y


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
def test_c_curve_accuracy_equals_scikit_learn_cross_val_score(kernel: str) -> None:
    X, y = _two_blobs()
    labels = y.copy()
    labels[3] = None  # unlabelled rows and excluded rows stay out of the curve
    excluded = np.zeros(len(y), dtype=bool)
    excluded[100] = True
    Cs = (0.01, 1.0, 100.0)
    out = c_curve_for_labels(X, labels, excluded, kernel=kernel, Cs=Cs, folds=4, seed=7)
    use = np.array([v is not None for v in labels]) & ~excluded
    Xu, yu = X[use], (y[use] == "yes").astype(int)
    assert out["n_rows"] == use.sum() and not out["sampled"]
    cv = StratifiedKFold(n_splits=4, shuffle=True, random_state=7)
    series = plotdata.curve_series(out["candidates"])
    assert len(series) == (1 if kernel == "linear" else 3)
    for s in series:
        gamma = "scale" if s.gamma is None else s.gamma
        for i, C in enumerate(s.C):
            # Reference: scikit-learn's SVC on the same folds solves the same two-class problem.
            ref = SVC(kernel=kernel, C=C, gamma=gamma)
            acc = cross_val_score(ref, Xu, yu, cv=cv).mean()
            bal = cross_val_score(ref, Xu, yu, cv=cv, scoring="balanced_accuracy").mean()
            assert s.accuracy[i] == pytest.approx(acc, abs=1e-9)
            assert s.balanced_accuracy[i] == pytest.approx(bal, abs=1e-9)


def test_boundary_is_exact_for_two_features() -> None:
    X, y = _two_blobs(120)
    model = SoftMarginClassifier(kernel="rbf", C=1.0).fit(X, y)
    # A rotated copy stands in for the projection: the map back to features is exact.
    theta = 0.7
    R = np.array([[np.cos(theta), -np.sin(theta)], [np.sin(theta), np.cos(theta)]])
    coords = (X - X.mean(axis=0)) @ R
    b = plotdata.boundary_in_projection(model, X, coords, grid=80)
    assert b.exact and b.drawn
    seg = b.segments[0.0]
    assert len(seg) > 20
    # Every end point of the f = 0 line, mapped back to features, has f close to 0.
    ends = np.vstack([seg[:, :2], seg[:, 2:]]) @ R.T + X.mean(axis=0)
    f = model.problems_[0].decision_function(ends)
    span = np.ptp(model.problems_[0].decision_function(X))
    assert np.max(np.abs(f)) < 0.05 * span


def test_boundary_is_skipped_with_a_reason() -> None:
    rng = np.random.default_rng(2)
    X = rng.normal(size=(90, 5))
    y = np.array(["a", "b", "c"] * 30, dtype=object)
    coords = X[:, :2]
    multi = SoftMarginClassifier(kernel="linear").fit(X, y)
    assert not plotdata.boundary_in_projection(multi, X, coords).drawn
    rbf = SoftMarginClassifier(kernel="rbf").fit(X, y != "a")
    skipped = plotdata.boundary_in_projection(rbf, X, coords)
    assert not skipped.drawn and "5 features" in skipped.note
    lin = SoftMarginClassifier(kernel="linear").fit(X, y != "a")
    approx = plotdata.boundary_in_projection(lin, X, coords)
    assert approx.drawn and not approx.exact
    assert not plotdata.boundary_in_projection(None, X, coords).drawn


def test_contour_of_a_plane_is_a_straight_line() -> None:
    xs = np.linspace(-1, 1, 21)
    ys = np.linspace(-1, 1, 11)
    gx, gy = np.meshgrid(xs, ys)
    seg = plotdata.contour_segments(xs, ys, gx + 2 * gy, 0.5)
    pts = np.vstack([seg[:, :2], seg[:, 2:]])
    np.testing.assert_allclose(pts[:, 0] + 2 * pts[:, 1], 0.5, atol=1e-12)


def test_compare_counts_and_metrics_table_match_a_recount() -> None:
    X, y = _two_blobs(200, seed=4)
    before = fit_margins(X, y, FitSettings(kernel="rbf", C=1.0, folds=3))
    edited = y.copy()
    wrong = np.flatnonzero(before.rows["zone"].to_numpy() == "wrong_side")
    edited[wrong] = np.where(y[wrong] == "yes", "no", "yes")
    after = fit_margins(X, edited, FitSettings(kernel="rbf", C=1.0, folds=3))
    comp = compare_fits(before, after)
    zb, za = before.rows["zone"].to_numpy(), after.rows["zone"].to_numpy()
    np.testing.assert_array_equal(comp.changed_rows["row"], np.flatnonzero(zb != za))
    assert comp.metrics["rows wrong side"] == (
        int(np.sum(zb == "wrong_side")),
        int(np.sum(za == "wrong_side")),
    )
    table = plotdata.metrics_table(comp.metrics).set_index("metric")
    line = table.loc["rows wrong side"]
    assert line["change"] == np.sum(za == "wrong_side") - np.sum(zb == "wrong_side")
    assert table.loc["held-out accuracy", "after"] == after.summary.heldout_accuracy


def test_score_on_reference_against_a_hand_count() -> None:
    ids = np.array(["r1", "r2", "r3", "r4", "r5", "r6"], dtype=object)
    before = pd.DataFrame({"model_label": ["a", "a", "b", "b", None, "a"]})
    after = pd.DataFrame({"model_label": ["a", "b", "b", "a", "a", "a"]})
    reference = pd.DataFrame(
        {"id": ["r1", "r2", "r3", "r4", "r5", "zz"], "truth": ["a", "b", "b", "b", "a", "a"]}
    )
    out = score_on_reference(ids, before, after, reference, "id", "truth")
    # r6 is not in the reference, r5 has no suggestion before, zz is not in the table:
    # scored rows r1..r4 with truth a, b, b, b.
    assert out["matched"] == 4 and out["unmatched_reference"] == 1
    # Before: a a b b -> right on r1, r3, r4 = 3/4; per class: a 1/1, b 2/3.
    assert out["before"]["accuracy"] == pytest.approx(3 / 4)
    assert out["before"]["balanced_accuracy"] == pytest.approx((1 + 2 / 3) / 2)
    # After: a b b a -> right on r1, r2, r3 = 3/4; per class: a 1/1, b 2/3.
    assert out["after"]["accuracy"] == pytest.approx(3 / 4)
    with pytest.raises(Exception, match="truth2"):
        score_on_reference(ids, before, after, reference, "id", "truth2")
