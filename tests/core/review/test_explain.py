"""Per-term contributions: the terms the window highlights must be the ones that really moved
the linear model's decision for the row."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.svm import SVC

from reviewer.core.model.engine import SoftMarginClassifier
from reviewer.core.review.explain import split_feature_name, term_contributions
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings

ROOT = Path(__file__).resolve().parents[3]
DEMO = ROOT / "reviewer" / "demo_data" / "coffee_lots.csv"

TEXTS = [
    "breaker tripped again in the plant room",
    "socket dead no power to the outlet",
    "light fitting flickering in corridor",
    "tap dripping in the kitchen sink",
    "toilet cistern keeps running",
    "leak under the basin pipe wet floor",
    "air conditioning unit blowing warm air",
    "radiator cold heating not working",
    "thermostat shows error and no heating",
    "door hinge broken and door will not close",
    "cupboard shelf collapsed needs new bracket",
    "skirting board loose in meeting room",
    "no power to lights in the kitchen",
    "pipe leak dripping from ceiling light",
    "heating noisy and air vent rattling",
    "window frame rotten draught coming in",
]
TRADES = ["electrical"] * 3 + ["plumbing"] * 3 + ["hvac"] * 3 + ["carpentry"] * 3
TRADES += ["electrical", "plumbing", "hvac", "carpentry"]


def _tfidf() -> tuple[sp.csr_matrix, list[str]]:
    vec = TfidfVectorizer(ngram_range=(1, 2), sublinear_tf=True)
    X = vec.fit_transform(TEXTS).tocsr()
    return X, [f"description::w:{t}" for t in vec.get_feature_names_out()]


def test_feature_names_split_into_column_term_and_kind() -> None:
    assert split_feature_name("description::w:no power") == ("description", "no power", "word")
    assert split_feature_name("description::c: lea") == ("description", " lea", "char")
    assert split_feature_name("site_B") == ("site_B", "site_B", "other")
    assert split_feature_name("vectors[3]") == ("vectors[3]", "vectors[3]", "other")


def test_two_classes_sum_to_scikit_learns_decision_on_tfidf() -> None:
    X, names = _tfidf()
    y = np.array([t == "electrical" for t in TRADES]).astype(int)
    labels = np.where(y == 1, "electrical", "other")
    # Reference: scikit-learn's SVC (LIBSVM) with a linear kernel on TfidfVectorizer output;
    # decision_function is w.x + b, positive for classes_[1].
    svc = SVC(kernel="linear", C=10.0).fit(X, labels)
    w = np.asarray(svc.coef_.toarray() if sp.issparse(svc.coef_) else svc.coef_).ravel()
    f = svc.decision_function(X)
    classes = [str(c) for c in svc.classes_]
    for row in range(X.shape[0]):
        model_label = classes[int(f[row] > 0)]
        given = str(labels[row])
        out = term_contributions(
            X[row],
            names,
            [w],
            [float(svc.intercept_[0])],
            classes,
            given,
            model_label,
            all_features=True,
        )
        sign = 1.0 if model_label == classes[1] else -1.0
        # Preferring the model's label: sign * f(x) = sum of contributions + sign * b.
        assert out["contribution"].sum() + out.attrs["offset"] == pytest.approx(
            sign * f[row], abs=1e-9
        )
        assert out.attrs["towards"] == model_label
        # Direct numpy: x_j * w_j * sign over the row's nonzero terms, largest first.
        x = X[row].toarray().ravel()
        direct = np.sort((x * w * sign)[x != 0])[::-1]
        np.testing.assert_allclose(out["contribution"].to_numpy(), direct, atol=1e-12)


def test_several_classes_explain_the_model_label_against_the_given_one() -> None:
    X, names = _tfidf()
    y = np.array(TRADES, dtype=object)
    y[0] = "plumbing"  # a wrong label: the model should still say electrical
    model = SoftMarginClassifier(kernel="linear", C=10.0).fit(X.toarray(), y)
    F = model.decision_matrix(X.toarray())
    classes = [str(c) for c in model.classes_]
    W = [p.w for p in model.problems_]
    b = [p.intercept for p in model.problems_]
    for row in range(X.shape[0]):
        m = classes[int(np.argmax(F[row]))]
        g = str(y[row])
        out = term_contributions(X[row], names, W, b, classes, g, m, all_features=True)
        if m != g:
            expect = F[row, classes.index(m)] - F[row, classes.index(g)]
            assert out.attrs["against"] == g
        else:
            rivals = [F[row, c] for c in range(len(classes)) if classes[c] != g]
            expect = F[row, classes.index(g)] - max(rivals)
            assert out.attrs["towards"] == g
        assert out["contribution"].sum() + out.attrs["offset"] == pytest.approx(expect, abs=1e-9)
        # The same row given dense gives the same numbers.
        dense = term_contributions(
            X[row].toarray()[0], names, W, b, classes, g, m, all_features=True
        )
        np.testing.assert_allclose(dense["contribution"], out["contribution"], atol=1e-12)
    top = term_contributions(X[0], names, W, b, classes, "plumbing", "electrical", k=3)
    assert 0 < len(top) <= 3
    assert (top["contribution"] > 0).all()
    assert top["contribution"].is_monotonic_decreasing
    # Every highlighted term is a word of the row's text.
    assert all(t in TEXTS[0] for t in top["term"])


def test_highlighting_keeps_text_terms_only() -> None:
    X, names = _tfidf()
    extra = sp.hstack([X, sp.csr_matrix(np.ones((X.shape[0], 1)) * 3.0)]).tocsr()
    names2 = [*names, "floor"]
    w = np.r_[np.ones(len(names)), 5.0]  # the numeric feature would dominate
    out = term_contributions(extra[0], names2, [w], [0.0], ["a", "b"], "a", "b", k=50)
    assert "floor" not in set(out["feature"])
    full = term_contributions(extra[0], names2, [w], [0.0], ["a", "b"], "a", "b", all_features=True)
    assert full.iloc[0]["feature"] == "floor"
    assert full.iloc[0]["kind"] == "other"


def test_non_linear_fit_gives_a_reason_and_no_terms() -> None:
    X, names = _tfidf()
    out = term_contributions(X[0], names, [None], [0.0], ["a", "b"], "a", "b")
    assert out.empty
    assert "linear" in out.attrs["reason"]


def test_session_contributions_add_up_to_the_fit_decision(tmp_path: Path) -> None:
    path = tmp_path / "lots.csv"
    pd.read_csv(DEMO, nrows=240).to_csv(path, index=False)
    with ReviewSession.open(path, label="grade", id_column="lot_id") as s:
        assert "no fit" in s.term_contributions(0).attrs["reason"]
        fit = s.fit(FitSettings(kernel="linear", C=1.0, folds=3, solver="exact"))
        assert fit.decision is not None
        classes = fit.classes
        text_cols = set(s.roles.text)
        for row in (0, 5, 17):
            out = s.term_contributions(row, all_features=True)
            m, g = out.attrs["towards"], out.attrs["against"]
            F = fit.decision[row]
            expect = F[classes.index(m)] - F[classes.index(g)]
            assert out["contribution"].sum() + out.attrs["offset"] == pytest.approx(
                expect, abs=1e-8
            )
            # What the window marks: terms of the row's own text columns, pushing the right way.
            top = s.term_contributions(row)
            assert top.attrs["reason"] == ""
            assert set(top["column"]) <= text_cols
            assert (top["contribution"] > 0).all()
            for col, term, kind in zip(top["column"], top["term"], top["kind"], strict=True):
                cell = str(s.frame[col].iloc[row]).lower()
                if kind == "char":
                    assert term.strip() in cell
        s.fit(FitSettings(kernel="rbf", C=1.0, folds=3))
        assert "linear" in s.term_contributions(0).attrs["reason"]
