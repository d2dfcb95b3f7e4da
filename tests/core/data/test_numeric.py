"""The one-pass numeric standardiser gives what scikit-learn's own pipeline gives."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.impute import SimpleImputer
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import FunctionTransformer, MaxAbsScaler, StandardScaler

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.numeric import NumericStandardiser
from reviewer.core.data.roles import ColumnRoles


def _to_float(frame: pd.DataFrame) -> np.ndarray:
    cols = [pd.to_numeric(frame[c], errors="coerce") for c in frame.columns]
    out = np.column_stack([c.to_numpy(dtype=float, na_value=np.nan) for c in cols])
    out[~np.isfinite(out)] = np.nan
    return out


def _reference(frame: pd.DataFrame) -> np.ndarray:
    """The straightforward scikit-learn pipeline: to numbers, MaxAbsScaler, median
    SimpleImputer (empty columns kept as zeros), StandardScaler."""
    pipe = Pipeline(
        [
            ("to_float", FunctionTransformer(_to_float)),
            ("bound", MaxAbsScaler()),
            ("impute", SimpleImputer(strategy="median", keep_empty_features=True)),
            ("scale", StandardScaler()),
        ]
    )
    return pipe.fit_transform(frame)


def _mixed_table(n: int, seed: int, with_missing: bool) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(
        {
            "normal": rng.normal(3.0, 2.0, n),
            "wide": rng.normal(0, 1e6, n),
            "ints": rng.integers(-50, 50, n),
            "flags": rng.random(n) < 0.3,
            "constant": np.full(n, 7.25),
            "huge": rng.choice([1e308, -1e308, 5e307, 0.0], n),
            "tiny": rng.normal(0, 1e-300, n),
            "as_text": [f" {v:.6g} " for v in rng.normal(10, 3, n)],
        }
    )
    if with_missing:
        frame["normal"] = frame["normal"].where(rng.random(n) > 0.1)
        frame["wide"] = frame["wide"].where(rng.random(n) > 0.5)
        frame.loc[::7, "ints"] = None  # becomes a float column with gaps
        frame["as_text"] = frame["as_text"].where(rng.random(n) > 0.2, "n/a")
        frame.loc[::11, "as_text"] = "twelve"  # text that is not a number counts as missing
        frame["normal"] = frame["normal"].where(np.arange(n) != 3, np.inf)
        frame["wide"] = frame["wide"].where(np.arange(n) != 5, -np.inf)
        frame["empty"] = np.nan
        frame["nullable"] = pd.array(rng.integers(0, 9, n), dtype="Int64")
        frame.loc[::3, "nullable"] = pd.NA
    return frame


@pytest.mark.parametrize("with_missing", [False, True])
@pytest.mark.parametrize("n", [12, 1000])
def test_matches_the_scikit_learn_pipeline(with_missing: bool, n: int) -> None:
    frame = _mixed_table(n, seed=n, with_missing=with_missing)
    expected = _reference(frame)
    got = NumericStandardiser().fit_transform(frame)
    assert got.dtype == np.float64 and got.shape == expected.shape
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("n", [1, 2])
def test_one_or_two_rows_match_the_pipeline(n: int) -> None:
    frame = _mixed_table(n, seed=n, with_missing=False)
    got = NumericStandardiser().fit_transform(frame)
    np.testing.assert_allclose(got, _reference(frame), rtol=1e-12, atol=1e-12)


def test_transform_of_new_rows_uses_the_fitted_bound_fill_and_scale() -> None:
    train = _mixed_table(500, seed=1, with_missing=True)
    new = _mixed_table(50, seed=2, with_missing=True)
    pipe = Pipeline(
        [
            ("to_float", FunctionTransformer(_to_float)),
            ("bound", MaxAbsScaler()),
            ("impute", SimpleImputer(strategy="median", keep_empty_features=True)),
            ("scale", StandardScaler()),
        ]
    ).fit(train)
    ours = NumericStandardiser().fit(train)
    np.testing.assert_allclose(ours.transform(new), pipe.transform(new), rtol=1e-12, atol=1e-12)


def test_feature_matrix_keeps_names_and_order_beside_categories() -> None:
    frame = _mixed_table(200, seed=3, with_missing=True)
    frame["colour"] = np.where(np.arange(200) % 3 == 0, "red", "blue")
    numeric = [c for c in frame.columns if c != "colour"]
    roles = ColumnRoles(label="unused", id=None, numeric=numeric, categorical=["colour"])
    X, names = feature_matrix(frame, roles)
    assert names == [*numeric, "colour_blue", "colour_red"]
    np.testing.assert_allclose(X[:, : len(numeric)], _reference(frame[numeric]), atol=1e-12)
    assert np.array_equal(X[:, -1], (np.arange(200) % 3 == 0).astype(float))
