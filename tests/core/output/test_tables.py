"""Cleaned Parquet and Excel: same schema and values, only the changed labels differ."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.loading import SourceInfo
from reviewer.core.errors import ExportError
from reviewer.core.output.cleaned import export_cleaned
from tests.core.output.builders import (
    assert_cells,
    sample_frame,
)


@pytest.mark.parametrize("keep", [False, True])
def test_parquet_round_trip(tmp_path, keep):
    frame = sample_frame()
    path = tmp_path / "lots.parquet"
    frame.to_parquet(path, compression="zstd")
    src = SourceInfo(path, "parquet", "0" * 64, None, None, None, 4, tuple(frame.columns))
    excluded = np.array([False, True, False, False])
    out = export_cleaned(
        src,
        "label",
        ["washed", "natural", "natural", "honey"],
        excluded,
        tmp_path / "clean.parquet",
        keep_excluded=keep,
        source_labels=frame["label"].tolist(),
    )
    assert_cells(
        pd.read_parquet(path),
        pd.read_parquet(out),
        "label",
        {2: "natural"},
        excluded,
        flag="review_excluded" if keep else None,
    )
    import pyarrow.parquet as pq

    meta = pq.ParquetFile(out).metadata.row_group(0).column(0)
    assert meta.compression == "ZSTD"


def test_parquet_integer_label_keeps_dtype(tmp_path):
    frame = sample_frame()
    path = tmp_path / "lots.parquet"
    frame.to_parquet(path)
    src = SourceInfo(path, "parquet", "0" * 64, None, None, None, 4, tuple(frame.columns))
    out = export_cleaned(
        src,
        "grade",
        ["1", "2", "2", "1"],
        np.zeros(4, bool),
        tmp_path / "clean.parquet",
        source_labels=["1", "2", "3", "1"],
    )
    result = pd.read_parquet(out)
    assert result["grade"].dtype == np.dtype("int64")
    assert result["grade"].tolist() == [1, 2, 2, 1]
    with pytest.raises(ExportError, match="does not fit column 'grade'"):
        export_cleaned(
            src, "grade", ["x", "2", "3", "1"], np.zeros(4, bool), tmp_path / "bad.parquet"
        )


@pytest.mark.parametrize("keep", [False, True])
def test_excel_round_trip(tmp_path, keep):
    frame = sample_frame()
    path = tmp_path / "lots.xlsx"
    with pd.ExcelWriter(path) as writer:
        pd.DataFrame({"note": ["cover"]}).to_excel(writer, sheet_name="About", index=False)
        frame.to_excel(writer, sheet_name="Lots", index=False)
    src = SourceInfo(path, "excel", "0" * 64, None, None, "Lots", 4, tuple(frame.columns))
    excluded = np.array([True, False, False, False])
    out = export_cleaned(
        src,
        "label",
        ["washed", "honey", "washed", "honey"],
        excluded,
        tmp_path / "clean.xlsx",
        keep_excluded=keep,
        source_labels=frame["label"].tolist(),
    )
    assert_cells(
        pd.read_excel(path, sheet_name="Lots"),
        pd.read_excel(out, sheet_name="Lots"),
        "label",
        {1: "honey"},
        excluded,
        flag="review_excluded" if keep else None,
    )


def test_excel_integer_label_keeps_numbers(tmp_path):
    frame = sample_frame()
    path = tmp_path / "lots.xlsx"
    frame.to_excel(path, index=False)
    src = SourceInfo(path, "excel", "0" * 64, None, None, None, 4, tuple(frame.columns))
    out = export_cleaned(
        src,
        "grade",
        ["1", "3", "3", "1"],
        np.zeros(4, bool),
        tmp_path / "clean.xlsx",
        source_labels=["1", "2", "3", "1"],
    )
    result = pd.read_excel(out)
    assert result["grade"].dtype == np.dtype("int64")
    assert result["grade"].tolist() == [1, 3, 3, 1]
