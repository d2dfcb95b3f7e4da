"""Loading tables: delimiters, encodings, formats, missing markers, refusals naming the file."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import label_strings, load_table
from reviewer.core.data.roles import infer_roles
from reviewer.core.errors import InputError
from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

ROWS = [
    ["r1", "1.5", "crème", "yes"],
    ["r2", "2.5", "brûlé", "no"],
    ["r3", "3.0", "plain", "yes"],
]
HEADER = ["id", "value", "note", "label"]


def _text(delimiter: str) -> str:
    return "\n".join(delimiter.join(r) for r in [HEADER, *ROWS]) + "\n"


@pytest.mark.parametrize(
    ("delimiter", "suffix"),
    [(",", ".csv"), (";", ".csv"), ("\t", ".tsv"), ("\t", ".txt"), ("|", ".txt")],
)
def test_delimiter_is_detected(tmp_path: Path, delimiter: str, suffix: str) -> None:
    path = tmp_path / f"table{suffix}"
    path.write_text(_text(delimiter), encoding="utf-8")
    loaded = load_table(path)
    assert loaded.source.delimiter == delimiter
    assert list(loaded.frame.columns) == HEADER
    assert loaded.frame["value"].tolist() == [1.5, 2.5, 3.0]
    assert loaded.source.kind == "delimited"


def test_semicolon_with_decimal_commas_is_not_mistaken_for_comma(tmp_path: Path) -> None:
    # A European export: ';' separates fields and ',' appears inside the numbers.
    path = tmp_path / "eu.csv"
    path.write_text("id;value;label\na;1,5;x\nb;2,5;y\nc;3,5;x\n", encoding="utf-8")
    loaded = load_table(path)
    assert loaded.source.delimiter == ";"
    assert list(loaded.frame.columns) == ["id", "value", "label"]


@pytest.mark.parametrize(
    ("encoding", "expected"),
    [
        ("utf-8", "utf-8"),
        ("utf-8-sig", "utf-8-sig"),
        ("latin-1", "latin-1"),
        ("utf-16", "utf-16"),
    ],
)
def test_encodings(tmp_path: Path, encoding: str, expected: str) -> None:
    path = tmp_path / "enc.csv"
    path.write_bytes(_text(",").encode(encoding))
    loaded = load_table(path)
    assert loaded.source.encoding == expected
    # the BOM must not leak into the first column's name
    assert list(loaded.frame.columns) == HEADER
    assert loaded.frame["note"].tolist() == ["crème", "brûlé", "plain"]


def test_fingerprint_is_sha256_of_the_bytes(tmp_path: Path) -> None:
    path = tmp_path / "t.csv"
    path.write_text(_text(","), encoding="utf-8")
    # SHA-256 as computed by Python's hashlib (FIPS 180-4).
    assert load_table(path).source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_parquet(tmp_path: Path) -> None:
    frame = pd.DataFrame({"id": ["a", "b", "c"], "x": [1.0, None, 3.0], "label": ["u", "v", "u"]})
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    loaded = load_table(path)
    assert loaded.source.kind == "parquet"
    assert loaded.frame["id"].tolist() == ["a", "b", "c"]
    assert np.isnan(loaded.frame["x"].iloc[1])


def test_excel_first_and_named_sheet(tmp_path: Path) -> None:
    path = tmp_path / "t.xlsx"
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        pd.DataFrame({"id": [1, 2], "x": [0.5, 1.5], "label": ["p", "q"]}).to_excel(
            writer, sheet_name="first", index=False
        )
        pd.DataFrame({"id": [7], "y": ["?"], "label": ["r"]}).to_excel(
            writer, sheet_name="second", index=False
        )
    loaded = load_table(path)
    assert loaded.source.kind == "excel"
    assert loaded.source.sheet == "first"
    assert loaded.frame["x"].tolist() == [0.5, 1.5]
    second = load_table(path, sheet="second")
    assert second.source.sheet == "second"
    assert second.frame["y"].isna().all()  # "?" is a missing marker in workbooks too
    with pytest.raises(InputError, match=r"no sheet named 'third'.*first, second"):
        load_table(path, sheet="third")


def test_missing_markers(tmp_path: Path) -> None:
    path = tmp_path / "m.csv"
    path.write_text("id,x,label\na,?,p\nb,null,q\nc,NA,p\nd,,q\ne,4,p\n", encoding="utf-8")
    frame = load_table(path).frame
    assert frame["x"].isna().tolist() == [True, True, True, True, False]
    assert frame["x"].iloc[4] == 4


def test_header_only_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "header.csv"
    path.write_text("id,x,label\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"header\.csv.*no data rows"):
        load_table(path)


@pytest.mark.parametrize("content", [b"", b"   \n\n"])
def test_empty_file_is_refused(tmp_path: Path, content: bytes) -> None:
    path = tmp_path / "empty.csv"
    path.write_bytes(content)
    with pytest.raises(InputError, match=r"empty\.csv.*empty"):
        load_table(path)


def test_text_named_parquet_is_refused_naming_the_file(tmp_path: Path) -> None:
    path = tmp_path / "fake.parquet"
    path.write_text(_text(","), encoding="utf-8")
    with pytest.raises(InputError, match=r"fake\.parquet.*not a Parquet file"):
        load_table(path)


def test_text_named_xlsx_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "fake.xlsx"
    path.write_text(_text(","), encoding="utf-8")
    with pytest.raises(InputError, match=r"fake\.xlsx"):
        load_table(path)


def test_random_bytes_are_refused(tmp_path: Path) -> None:
    path = tmp_path / "noise.csv"
    path.write_bytes(np.random.default_rng(0).integers(0, 256, 4000, dtype=np.uint8).tobytes())
    with pytest.raises(InputError, match=r"noise\.csv"):
        load_table(path)


def test_missing_file_and_folder_are_refused(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"nothere\.csv.*not found"):
        load_table(tmp_path / "nothere.csv")
    with pytest.raises(InputError, match="folder"):
        load_table(tmp_path)


def test_blank_and_repeated_column_names_get_unique_names(tmp_path: Path) -> None:
    path = tmp_path / "names.csv"
    path.write_text(",x,x,label\n1,2,3,p\n4,5,6,q\n", encoding="utf-8")
    cols = list(load_table(path).frame.columns)
    assert len(set(cols)) == 4
    assert cols[3] == "label"


def test_label_strings() -> None:
    values = pd.Series([1.0, 2.0, np.nan, 2.5])
    assert label_strings(values).tolist() == ["1", "2", None, "2.5"]
    text = pd.Series(["a", " b ", None, "", "c"], dtype=object)
    assert label_strings(text).tolist() == ["a", "b", None, None, "c"]


def test_unlabelled_rows_are_kept_and_left_out_of_the_fit(tmp_path: Path) -> None:
    rng = np.random.default_rng(0)
    n = 60
    x = rng.normal(size=n)
    label = np.where(x > 0, "hi", "lo").astype(object)
    label[[3, 17, 40]] = None
    path = tmp_path / "partly.csv"
    pd.DataFrame({"id": [f"r{i}" for i in range(n)], "x": x, "label": label}).to_csv(
        path, index=False
    )
    loaded = load_table(path)
    assert len(loaded.frame) == n
    labels = label_strings(loaded.frame["label"])
    assert [i for i, v in enumerate(labels) if v is None] == [3, 17, 40]
    roles = infer_roles(loaded.frame, "label", "id")
    X, _ = feature_matrix(loaded.frame, roles)
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=3))
    s = result.summary
    assert (s.n_rows, s.n_fitted, s.n_unlabelled) == (n, n - 3, 3)
    rows = result.rows
    # An unlabelled row has no margin against a label, but the model still suggests one.
    assert rows.loc[[3, 17, 40], "margin"].isna().all()
    assert rows.loc[[3, 17, 40], "alpha"].isna().all()
    assert (rows.loc[[3, 17, 40], "rank"] == 0).all()
    assert rows.loc[[3, 17, 40], "model_label"].notna().all()
    assert np.isfinite(rows["margin"].drop(index=[3, 17, 40])).all()


def test_a_preview_reads_only_the_leading_rows_of_each_format(tmp_path: Path) -> None:
    frame = pd.DataFrame({"x": np.arange(3000.0), "label": ["a", "b", "c"] * 1000})
    csv_path, pq_path = tmp_path / "t.csv", tmp_path / "t.parquet"
    frame.to_csv(csv_path, index=False)
    frame.to_parquet(pq_path, row_group_size=500)
    xlsx_path = tmp_path / "t.xlsx"
    frame.head(300).to_excel(xlsx_path, index=False)
    for path, n in ((csv_path, 3000), (pq_path, 3000), (xlsx_path, 300)):
        head = load_table(path, max_rows=120)
        assert len(head.frame) == 120, path
        assert head.frame["x"].tolist() == list(np.arange(120.0))
        # The fingerprint is the whole file's, the same as a full load's.
        assert head.source.sha256 == load_table(path).source.sha256
        assert len(load_table(path).frame) == n


def test_parquet_reads_as_pandas_does_with_the_files_sha256(tmp_path: Path) -> None:
    frame = pd.DataFrame(
        {
            "text": ["a", None, 'ç, "q"'],
            "count": pd.array([1, None, 3], dtype="Int64"),
            "x": [0.1, np.nan, 1e308],
            "flag": [True, False, True],
            "when": pd.to_datetime(["2024-01-01", None, "2024-03-05"]),
            "level": pd.Categorical(["lo", "hi", "lo"]),
        },
        index=[10, 11, 12],
    )
    path = tmp_path / "t.parquet"
    frame.to_parquet(path)
    loaded = load_table(path)
    # pandas' own reader is the reference for the columns and their types.
    pd.testing.assert_frame_equal(loaded.frame, pd.read_parquet(path).reset_index(drop=True))
    # SHA-256 as computed by Python's hashlib (FIPS 180-4).
    assert loaded.source.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
