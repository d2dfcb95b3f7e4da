"""The column-wise CSV writer keeps every value that pandas' own writer keeps."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from reviewer.core.output import fastcsv
from reviewer.core.output.fastcsv import csv_bytes

TEXTS = [
    "plain",
    "comma, inside",
    'a "quoted" word',
    "two\nlines",
    "ünïcödé ✓ 名前",
    "=SUM(A1:A9)",  # formula-like text is data here and stays as it is
    "+1-2",
    "@cmd",
    " padded ",
    "",
    None,
    "007",
]


def _edge_table() -> pd.DataFrame:
    n = len(TEXTS)
    floats = [0.1, 1 / 3, 1e308, -1e-308, 5e-324, -0.0, 100.0, np.nan, 1e16, 1e15, 2.5e-5, 1e22]
    return pd.DataFrame(
        {
            "row_id": [str(i) for i in range(n)],
            "label": TEXTS,
            "margin": floats,
            "whole": np.arange(n, dtype=float) - 3,  # every value whole: read back as floats
            "rank": pd.array([1, None, 3, 4, 5, 6, 7, None, 9, 10, 11, 12], dtype="Int64"),
            "count": np.arange(n, dtype=np.int64),
            "flag": np.arange(n) % 2 == 0,
            "mixed": [1, "x", 2.5, None, "y,z", 3, "a", "b", np.nan, "c", 4, "d"],
            "odd name, quoted": ["q"] * n,
        }
    )


def _read(data: bytes) -> pd.DataFrame:
    return pd.read_csv(io.BytesIO(data), keep_default_na=False, na_values=[""])


def test_reads_back_equal_to_the_pandas_writer() -> None:
    frame = _edge_table()
    ours = csv_bytes(frame, line_end="\n")
    theirs = frame.to_csv(index=False, lineterminator="\n").encode("utf-8")
    assert ours.split(b"\n", 1)[0] == theirs.split(b"\n", 1)[0]  # same header, same order
    pd.testing.assert_frame_equal(_read(ours), _read(theirs))


def test_floats_read_back_bit_for_bit() -> None:
    rng = np.random.default_rng(0)
    values = np.r_[
        rng.normal(size=2000),
        rng.normal(size=500) * 10.0 ** rng.integers(-300, 300, 500),
        [0.0, -0.0, 1.0, -7.0, 2.0**53, 5e-324, 1.7976931348623157e308, np.nan],
    ]
    frame = pd.DataFrame({"x": values})
    cells = csv_bytes(frame, line_end="\n").decode("utf-8").splitlines()[1:]
    # Python's float() parses correctly rounded, so the text alone decides what comes back.
    back = np.array([float(c.strip('"')) if c.strip('"') else np.nan for c in cells])
    same = (back.view(np.int64) == values.view(np.int64)) | (np.isnan(back) & np.isnan(values))
    assert same.all(), values[~same][:5]


def test_text_reads_back_as_written() -> None:
    frame = _edge_table()
    back = pd.read_csv(io.BytesIO(csv_bytes(frame)), keep_default_na=False, dtype=str)
    expected = ["" if t is None else t for t in TEXTS]
    assert back["label"].tolist() == expected
    assert back["rank"].tolist() == ["1", "", "3", "4", "5", "6", "7", "", "9", "10", "11", "12"]


def test_large_tables_are_written_in_blocks(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(fastcsv, "BLOCK_ROWS", 5)
    frame = _edge_table()
    assert _read(csv_bytes(frame)).equals(_read(frame.to_csv(index=False).encode()))


def test_a_column_arrow_cannot_write_goes_to_pandas() -> None:
    frame = pd.DataFrame({"when": pd.to_datetime(["2024-01-02", None]), "x": [1.5, 2.0]})
    assert csv_bytes(frame) == frame.to_csv(index=False).encode("utf-8")
