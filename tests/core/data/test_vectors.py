"""Vectors as features: a Parquet list column and a .npy file rank rows as the same numbers
given as plain numeric columns do; bad vectors are refused with one clear message."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from reviewer.core.data.dataset import prepare_dataset
from reviewer.core.data.loading import load_table, table_from_frame
from reviewer.core.data.roles import infer_roles
from reviewer.core.door import scan_file
from reviewer.core.errors import InputError
from reviewer.core.values import FitSettings

N, D = 150, 4
SETTINGS = FitSettings(kernel="rbf", C=1.0, folds=5, seed=0)


@pytest.fixture
def numbers() -> tuple[np.ndarray, np.ndarray]:
    """(n, d) vectors on two overlapping classes, and the labels."""
    rng = np.random.default_rng(5)
    labels = np.array(["cat", "dog"] * (N // 2))
    vectors = rng.normal(size=(N, D)) + np.where(labels == "cat", 0.8, -0.8)[:, None]
    vectors[:, 2] *= 40.0  # scales differ, as embeddings' elements often do
    return vectors, labels


def ranking(path: Path, **kwargs: object) -> pd.DataFrame:
    return scan_file(path, "label", id_column="key", settings=SETTINGS, **kwargs).table


def test_list_column_file_and_plain_columns_rank_alike(
    tmp_path: Path, numbers: tuple[np.ndarray, np.ndarray]
) -> None:
    vectors, labels = numbers
    keys = [f"k{i:03d}" for i in range(N)]
    plain = pd.DataFrame({"key": keys, **{f"e{j}": vectors[:, j] for j in range(D)}})
    plain["label"] = labels
    plain.to_csv(tmp_path / "plain.csv", index=False)
    expected = ranking(tmp_path / "plain.csv")

    # A Parquet list column, and a fixed-size-list column, as embedding tools write them.
    for name, kind in (("list", pa.list_(pa.float64())), ("fixed", pa.list_(pa.float64(), D))):
        table = pa.table(
            {
                "key": keys,
                "emb": pa.array([row.tolist() for row in vectors], type=kind),
                "label": labels.tolist(),
            }
        )
        pq.write_table(table, tmp_path / f"{name}.parquet")
        loaded = load_table(tmp_path / f"{name}.parquet")
        roles = infer_roles(loaded.frame, "label", "key")
        assert roles.vector == ["emb"], name
        data = prepare_dataset(loaded, roles)
        assert data.feature_names == [f"emb[{j}]" for j in range(D)]
        got = ranking(tmp_path / f"{name}.parquet")
        assert (got["rank"] == expected["rank"]).all(), name
        assert np.allclose(got["heldout_margin"], expected["heldout_margin"], atol=1e-8)

    # The same numbers in a .npy file beside a table holding only the id and the label.
    np.save(tmp_path / "emb.npy", vectors)
    pd.DataFrame({"key": keys, "label": labels}).to_csv(tmp_path / "bare.csv", index=False)
    got = ranking(tmp_path / "bare.csv", vectors=tmp_path / "emb.npy")
    assert (got["rank"] == expected["rank"]).all()
    assert np.allclose(got["heldout_margin"], expected["heldout_margin"], atol=1e-8)


def frame_with(vec: list) -> pd.DataFrame:
    n = len(vec)
    return pd.DataFrame({"x": np.arange(n) % 3, "emb": vec, "label": ["a", "b"] * (n // 2)})


def build(frame: pd.DataFrame, **kwargs: object) -> None:
    prepare_dataset(table_from_frame(frame), label="label", **kwargs)


def test_ragged_vectors_name_the_rows_and_lengths() -> None:
    vec = [[1.0, 2.0, 3.0]] * 10
    vec[4] = [1.0, 2.0]
    vec[7] = [1.0, 2.0, 3.0, 4.0]
    with pytest.raises(
        InputError,
        match=r"'emb' is ragged: most rows have 3 numbers but row 4 "
        r"has 2, row 7 has 4",
    ):
        build(frame_with(vec))


def test_nan_or_infinity_inside_vectors_is_refused() -> None:
    vec = [[1.0, 2.0]] * 10
    vec[3] = [np.nan, 1.0]
    with pytest.raises(InputError, match=r"'emb': NaN inside the vectors of row\(s\) 3"):
        build(frame_with(vec))
    vec[3] = [np.inf, 1.0]
    with pytest.raises(InputError, match=r"'emb': infinity inside the vectors of row\(s\) 3"):
        build(frame_with(vec))


def test_a_row_without_a_vector_is_refused() -> None:
    vec: list = [[1.0, 2.0]] * 10
    vec[6] = None
    with pytest.raises(InputError, match=r"'emb': row\(s\) 6 have no vector"):
        build(frame_with(vec))


def test_lists_of_words_are_not_vectors() -> None:
    frame = frame_with([["red", "green"]] * 10)
    frame["x"] = np.arange(10.0)
    roles = infer_roles(frame, "label")
    assert "not a list of numbers" in roles.ignored["emb"]


@pytest.mark.parametrize(
    ("array", "message"),
    [
        (np.zeros((9, 3)), r"has 9 vectors but the table has 10 rows"),
        (np.zeros(10), r"must be a 2-D array \(rows, d\); this one has shape \(10,\)"),
        (np.zeros((10, 2, 2)), r"must be a 2-D array"),
        (np.array([["a", "b"]] * 10), r"must be numbers; this array holds <U1"),
        (np.where(np.eye(10, 3) > 0, np.nan, 1.0), r"NaN inside the vectors of row\(s\) 0, 1, 2"),
    ],
)
def test_bad_vectors_files_are_refused(tmp_path: Path, array: np.ndarray, message: str) -> None:
    path = tmp_path / "v.npy"
    np.save(path, array)
    with pytest.raises(InputError, match=message) as caught:
        build(frame_with([[1.0]] * 10).drop(columns="emb"), vectors=path)
    assert str(path) in str(caught.value)


def test_a_file_that_is_not_npy_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "v.npy"
    path.write_text("1,2,3\n")
    with pytest.raises(InputError, match=r"v.npy: not a .npy file"):
        build(frame_with([[1.0]] * 10).drop(columns="emb"), vectors=path)
