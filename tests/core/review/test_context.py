"""Context for one row: nearest neighbours, class norms, the feature profile, the projection.

Reference data: scikit-learn's bundled iris table (Fisher 1936); references: scikit-learn's
NearestNeighbors (brute force) and PCA, NumPy's median and standard deviation.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_iris
from sklearn.decomposition import PCA
from sklearn.neighbors import NearestNeighbors

from reviewer.core.data.roles import ColumnRoles
from reviewer.core.review.context import (
    UNUSUAL_Z,
    class_norms,
    feature_profile,
    nearest_neighbours,
    projection_2d,
)


@pytest.fixture(scope="module")
def iris() -> tuple[pd.DataFrame, np.ndarray, ColumnRoles]:
    data = load_iris(as_frame=True)
    frame = data.data.copy()
    frame.columns = ["sepal_length", "sepal_width", "petal_length", "petal_width"]
    frame["soil"] = np.where(np.arange(150) % 3 == 0, "clay", "loam")
    labels = np.array(data.target_names, dtype=object)[data.target]
    roles = ColumnRoles(
        label="species", id=None, numeric=list(frame.columns[:4]), categorical=["soil"]
    )
    return frame, labels, roles


def test_nearest_neighbours_match_scikit_learn(iris) -> None:
    frame, _, _ = iris
    X = frame.iloc[:, :4].to_numpy()
    candidates = np.ones(len(X), dtype=bool)
    candidates[[5, 6, 7]] = False  # excluded rows are never neighbours
    pos, dist = nearest_neighbours(X, 0, candidates, k=5)
    pool = np.flatnonzero(candidates & (np.arange(len(X)) != 0))
    ref = NearestNeighbors(n_neighbors=5, algorithm="brute").fit(X[pool])
    ref_dist, ref_idx = ref.kneighbors(X[[0]])
    np.testing.assert_allclose(dist, ref_dist[0])
    assert set(pos) == set(pool[ref_idx[0]])  # ties may come in another order
    assert 0 not in pos and not set(pos) & {5, 6, 7}


def test_class_norms_are_the_class_medians_and_spreads(iris) -> None:
    frame, labels, roles = iris
    use = np.ones(len(frame), dtype=bool)
    norms = class_norms(frame, roles, labels, use)
    assert norms.classes == ["setosa", "versicolor", "virginica"]
    for i, cls in enumerate(norms.classes):
        block = frame.loc[labels == cls, roles.numeric].to_numpy()
        np.testing.assert_allclose(norms.median[i], np.median(block, axis=0))
        np.testing.assert_allclose(norms.spread[i], np.std(block, axis=0))
    shares = norms.levels["soil"]["setosa"]
    assert shares["clay"] == pytest.approx(np.mean(frame["soil"][labels == "setosa"] == "clay"))


def test_a_value_far_from_its_class_is_marked_unusual(iris) -> None:
    frame, labels, roles = iris
    frame = frame.copy()
    norms = class_norms(frame, roles, labels, np.ones(len(frame), dtype=bool))
    # Row 0 is a setosa; give it a petal as long as a virginica's.
    frame.loc[0, "petal_length"] = 6.0
    profile = feature_profile(frame, roles, norms, 0, "setosa").set_index("feature")
    i = norms.classes.index("setosa")
    j = roles.numeric.index("petal_length")
    expected = abs(6.0 - norms.median[i, j]) / norms.spread[i, j]
    assert profile.loc["petal_length", "distance"] == pytest.approx(expected)
    assert expected > UNUSUAL_Z and profile.loc["petal_length", "unusual"]
    assert not profile.loc["sepal_width", "unusual"]
    assert profile.loc["soil", "kind"] == "categorical"


def test_projection_is_the_first_two_principal_components(iris) -> None:
    frame, _, _ = iris
    X = frame.iloc[:, :4].to_numpy()
    coords, share = projection_2d(X)
    ref = PCA(n_components=2, random_state=0).fit(X)
    np.testing.assert_allclose(share, ref.explained_variance_ratio_)
    # Components are defined up to sign.
    ref_coords = ref.transform(X)
    for k in range(2):
        assert abs(np.corrcoef(coords[:, k], ref_coords[:, k])[0, 1]) == pytest.approx(1.0)
