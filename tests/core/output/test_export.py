"""Export: cleaned tables keep the source format byte for byte, writes are all-or-nothing."""

from __future__ import annotations

import csv
import errno
import io
import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import reviewer
from reviewer.core.errors import ExportError
from reviewer.core.output import atomic
from reviewer.core.output.export import (
    AUDIT_COLUMNS,
    CAUTION,
    export_cleaned,
    write_audit_csv,
    write_audit_jsonl,
    write_summary_html,
)


@dataclass(frozen=True)
class FakeSource:
    """Stand-in for reviewer.core.data.loading.SourceInfo (same attributes)."""

    path: Path
    kind: str
    sha256: str
    delimiter: str | None
    encoding: str | None
    sheet: str | None
    n_rows: int
    columns: tuple[str, ...]


def delimited_source(path: Path, raw: bytes, delimiter: str, encoding: str, columns, n_rows):
    path.write_bytes(raw)
    return FakeSource(
        path.resolve(), "delimited", "0" * 64, delimiter, encoding, None, n_rows, tuple(columns)
    )


def read_text_table(path: Path, delimiter: str, encoding: str) -> pd.DataFrame:
    return pd.read_csv(path, sep=delimiter, encoding=encoding, dtype=str, keep_default_na=False)


def assert_cells(source_df, out_df, label_column, new_labels: dict[int, str], excluded, flag=None):
    """The cleaned table equals the source cell by cell except the labels that changed."""
    expected = source_df.copy()
    for row, value in new_labels.items():
        expected.loc[row, label_column] = value
    if flag is None:
        expected = expected.loc[~excluded]
    else:
        expected[flag] = excluded
    pd.testing.assert_frame_equal(
        out_df.reset_index(drop=True), expected.reset_index(drop=True), check_dtype=True
    )


def no_leftovers(folder: Path, keep: set[str]) -> None:
    assert {p.name for p in folder.iterdir()} == keep


# -- delimited text: bytes -----------------------------------------------------------------


def run_delimited(tmp_path, lines, line_break, delimiter, encoding, bom=b"", **kw):
    """Export with row 1 relabelled and row 2 excluded; return (source, out_bytes, labels)."""
    plain = "utf-8" if encoding == "utf-8-sig" else encoding  # the BOM is added by hand
    raw = bom + (line_break.join(lines) + line_break).encode(plain)
    columns = kw.pop("columns")
    src = delimited_source(tmp_path / "data.txt", raw, delimiter, encoding, columns, len(lines) - 1)
    out = export_cleaned(
        src, "label", kw.pop("labels"), kw.pop("excluded"), tmp_path / "clean.txt", **kw
    )
    return src, out.read_bytes()


def test_comma_utf8_only_changed_label_bytes_differ(tmp_path):
    lines = ["id,name,label,score", "1,Ann,cat,0.5", "2,Bob,dog,1.25", "3,Cy,cat,2", "4,Di,dog,"]
    labels = ["cat", "bird", "cat", "dog"]
    excluded = np.array([False, False, True, False])
    src, data = run_delimited(
        tmp_path,
        lines,
        "\n",
        ",",
        "utf-8",
        columns=lines[0].split(","),
        labels=labels,
        excluded=excluded,
        source_labels=["cat", "dog", "cat", "dog"],
    )
    expected = "\n".join([lines[0], lines[1], "2,Bob,bird,1.25", lines[4]]) + "\n"
    assert data == expected.encode("utf-8")
    assert_cells(
        read_text_table(src.path, ",", "utf-8"),
        read_text_table(tmp_path / "clean.txt", ",", "utf-8"),
        "label",
        {1: "bird"},
        excluded,
    )


def test_bom_and_crlf_are_kept(tmp_path):
    lines = ["label,city", "ok,Oslo", "bad,Lima", "ok,Kyiv"]
    src, data = run_delimited(
        tmp_path,
        lines,
        "\r\n",
        ",",
        "utf-8-sig",
        bom=b"\xef\xbb\xbf",
        columns=("label", "city"),
        labels=["ok", "ok", "ok"],
        excluded=np.array([False, False, False]),
        source_labels=["ok", "bad", "ok"],
    )
    assert data == b"\xef\xbb\xbflabel,city\r\nok,Oslo\r\nok,Lima\r\nok,Kyiv\r\n"
    assert_cells(
        read_text_table(src.path, ",", "utf-8-sig"),
        read_text_table(tmp_path / "clean.txt", ",", "utf-8-sig"),
        "label",
        {1: "ok"},
        np.zeros(3, bool),
    )


def test_semicolon_latin1_with_accents(tmp_path):
    lines = ["nom;label;ville", "Émile;forêt;Genève", "Zoë;plage;Brest", "Loïc;forêt;Nîmes"]
    excluded = np.array([True, False, False])
    src, data = run_delimited(
        tmp_path,
        lines,
        "\n",
        ";",
        "latin-1",
        columns=("nom", "label", "ville"),
        labels=["forêt", "forêt", "été"],
        excluded=excluded,
        source_labels=["forêt", "plage", "forêt"],
    )
    expected = "nom;label;ville\nZoë;forêt;Brest\nLoïc;été;Nîmes\n".encode("latin-1")
    assert data == expected
    assert_cells(
        read_text_table(src.path, ";", "latin-1"),
        read_text_table(tmp_path / "clean.txt", ";", "latin-1"),
        "label",
        {1: "forêt", 2: "été"},
        excluded,
    )


def test_label_the_encoding_cannot_hold_is_refused(tmp_path):
    lines = ["label;x", "a;1"]
    with pytest.raises(ExportError, match="cannot encode"):
        run_delimited(
            tmp_path,
            lines,
            "\n",
            ";",
            "latin-1",
            columns=("label", "x"),
            labels=["日本"],
            excluded=np.array([False]),
            source_labels=["a"],
        )
    no_leftovers(tmp_path, {"data.txt"})


def test_tsv_keeps_tabs_and_spaces(tmp_path):
    # Spaces and commas are data in a TSV; a record of empty fields is still a record.
    lines = ["label\tnote\textra", "x\t has , comma \t", "y\t\t", "x\tend\t1", "\t\t"]
    excluded = np.array([False, False, True, False])
    src, data = run_delimited(
        tmp_path,
        lines,
        "\n",
        "\t",
        "utf-8",
        columns=("label", "note", "extra"),
        labels=["x", "z", "x", "w x"],
        excluded=excluded,
        source_labels=["x", "y", "x", None],
    )
    assert data == b"label\tnote\textra\nx\t has , comma \t\nz\t\t\nw x\t\t\n"
    assert_cells(
        read_text_table(src.path, "\t", "utf-8"),
        read_text_table(tmp_path / "clean.txt", "\t", "utf-8"),
        "label",
        {1: "z", 3: "w x"},
        excluded,
    )


def test_quoted_fields_embedded_delimiter_newline_and_quotes(tmp_path):
    raw = (
        b"id,text,label\r\n"
        b'1,"a, b","cat"\r\n'
        b'2,"line one\nline two",dog\r\n'
        b'3,"he said ""no""",cat\r\n'
        b'4,12" screen,"do""g"\r\n'
    )
    src = delimited_source(tmp_path / "q.csv", raw, ",", "utf-8", ("id", "text", "label"), 4)
    labels = ["bird", 'new, "odd"\nlabel', "cat", 'do"g']
    export_cleaned(
        src,
        "label",
        labels,
        np.zeros(4, bool),
        tmp_path / "out.csv",
        source_labels=["cat", "dog", "cat", 'do"g'],
    )
    # Row 0 was quoted and stays quoted; row 1 needs quoting for its comma, quote and newline.
    expected = (
        raw.decode()
        .replace('"a, b","cat"', '"a, b","bird"')
        .replace('line two",dog', 'line two","new, ""odd""\nlabel"')
        .encode()
    )
    assert (tmp_path / "out.csv").read_bytes() == expected
    out_df = pd.read_csv(tmp_path / "out.csv", dtype=str, keep_default_na=False)
    assert out_df["label"].tolist() == labels
    assert out_df["text"].tolist() == ["a, b", "line one\nline two", 'he said "no"', '12" screen']


def test_reformatted_labels_do_not_touch_bytes(tmp_path):
    # pandas reads " 01" and "1.50" as numbers; the caller's labels are their str() forms.
    raw = b"label,x\n01,a\n1.50,b\n\n02,c"
    src = delimited_source(tmp_path / "n.csv", raw, ",", "utf-8", ("label", "x"), 3)
    export_cleaned(
        src,
        "label",
        ["1", "1.5", "3"],
        np.zeros(3, bool),
        tmp_path / "o.csv",
        source_labels=[1, 1.5, 2],
    )
    # Only the last label changed; the blank line and the missing final line break stay.
    assert (tmp_path / "o.csv").read_bytes() == b"label,x\n01,a\n1.50,b\n\n3,c"


def test_without_source_labels_compares_field_text(tmp_path):
    raw = b'label,x\na,1\n"b",2\nNA,3\n'
    src = delimited_source(tmp_path / "t.csv", raw, ",", "utf-8", ("label", "x"), 3)
    export_cleaned(src, "label", ["a", "b", None], np.zeros(3, bool), tmp_path / "same.csv")
    assert (tmp_path / "same.csv").read_bytes() == raw
    export_cleaned(src, "label", ["a", "c", None], np.zeros(3, bool), tmp_path / "diff.csv")
    assert (tmp_path / "diff.csv").read_bytes() == raw.replace(b'"b"', b'"c"')


def test_keep_excluded_adds_flag_column(tmp_path):
    raw = b"id;label\r\n1;a\r\n2;b\r\n3;a\r\n"
    src = delimited_source(tmp_path / "k.csv", raw, ";", "utf-8", ("id", "label"), 3)
    excluded = np.array([False, True, False])
    export_cleaned(
        src,
        "label",
        ["a", "b", "b"],
        excluded,
        tmp_path / "o.csv",
        source_labels=["a", "b", "a"],
        keep_excluded=True,
    )
    assert (tmp_path / "o.csv").read_bytes() == (
        b"id;label;review_excluded\r\n1;a;false\r\n2;b;true\r\n3;b;false\r\n"
    )
    out_df = pd.read_csv(tmp_path / "o.csv", sep=";")
    assert out_df["review_excluded"].tolist() == [False, True, False]
    assert out_df["label"].tolist() == ["a", "b", "b"]


def test_utf16_with_bom_round_trip(tmp_path):
    text = "label,x\r\nα,1\r\nβ,2\r\n"
    raw = text.encode("utf-16")  # Python writes a BOM in native order
    src = delimited_source(tmp_path / "u.csv", raw, ",", "utf-16", ("label", "x"), 2)
    export_cleaned(
        src, "label", ["α", "γ"], np.zeros(2, bool), tmp_path / "o.csv", source_labels=["α", "β"]
    )
    assert (tmp_path / "o.csv").read_bytes() == text.replace("β", "γ").encode("utf-16")


def test_row_count_mismatch_is_refused(tmp_path):
    src = delimited_source(tmp_path / "m.csv", b"label\na\nb\n", ",", "utf-8", ("label",), 3)
    with pytest.raises(ExportError, match="found 2 data records"):
        export_cleaned(src, "label", ["a", "b", "c"], np.zeros(3, bool), tmp_path / "o.csv")
    no_leftovers(tmp_path, {"m.csv"})


def test_unclosed_quote_is_refused(tmp_path):
    src = delimited_source(
        tmp_path / "m.csv", b'label,x\na,"open\nb,2\n', ",", "utf-8", ("label", "x"), 1
    )
    with pytest.raises(ExportError, match="not closed"):
        export_cleaned(src, "label", ["b"], np.zeros(1, bool), tmp_path / "o.csv")
    # A long line before the open quote must not make the record scan backtrack forever.
    long = b"label,x\n" + b"a" * 300 + b',"open\n' + b"b,2\n"
    src = delimited_source(tmp_path / "m2.csv", long, ",", "utf-8", ("label", "x"), 1)
    with pytest.raises(ExportError, match="at line 2 is not closed"):
        export_cleaned(src, "label", ["b"], np.zeros(1, bool), tmp_path / "o.csv")


# -- Parquet and Excel -----------------------------------------------------------------------


def sample_frame() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "id": np.array([10, 11, 12, 13], dtype="int64"),
            "weight": [0.5, np.nan, 2.25, 3.0],
            "origin": ["Kenya", "Perú", None, "<b>x</b>"],
            "label": ["washed", "natural", "washed", "honey"],
            "grade": np.array([1, 2, 3, 1], dtype="int64"),
        }
    )


@pytest.mark.parametrize("keep", [False, True])
def test_parquet_round_trip(tmp_path, keep):
    frame = sample_frame()
    path = tmp_path / "lots.parquet"
    frame.to_parquet(path, compression="zstd")
    src = FakeSource(path, "parquet", "0" * 64, None, None, None, 4, tuple(frame.columns))
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
    src = FakeSource(path, "parquet", "0" * 64, None, None, None, 4, tuple(frame.columns))
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
    src = FakeSource(path, "excel", "0" * 64, None, None, "Lots", 4, tuple(frame.columns))
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
    src = FakeSource(path, "excel", "0" * 64, None, None, None, 4, tuple(frame.columns))
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


# -- where and how files are written ----------------------------------------------------------


def simple_csv(tmp_path) -> FakeSource:
    return delimited_source(tmp_path / "d.csv", b"label\na\nb\n", ",", "utf-8", ("label",), 2)


def test_export_onto_source_is_refused(tmp_path):
    src = simple_csv(tmp_path)
    for target in (src.path, tmp_path / "." / "d.csv"):
        with pytest.raises(ExportError, match="source data file"):
            export_cleaned(src, "label", ["b", "b"], np.zeros(2, bool), target, overwrite=True)
    link = tmp_path / "alias.csv"
    link.symlink_to(src.path)
    with pytest.raises(ExportError, match="source data file"):
        export_cleaned(src, "label", ["b", "b"], np.zeros(2, bool), link, overwrite=True)
    assert src.path.read_bytes() == b"label\na\nb\n"


def test_audit_and_summary_refuse_the_source_too(tmp_path):
    src = simple_csv(tmp_path)
    with pytest.raises(ExportError, match="source data file"):
        write_audit_csv([], src.path, overwrite=True, protect=[src.path])
    with pytest.raises(ExportError, match="source data file"):
        write_summary_html(summary_for(src), src.path, overwrite=True, protect=[src.path])
    assert src.path.read_bytes() == b"label\na\nb\n"


def test_existing_target_needs_overwrite(tmp_path):
    src = simple_csv(tmp_path)
    target = tmp_path / "out.csv"
    target.write_bytes(b"yesterday")
    with pytest.raises(ExportError, match="already exists"):
        export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), target)
    assert target.read_bytes() == b"yesterday"
    export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), target, overwrite=True)
    assert target.read_bytes() == b"label\na\nc\n"
    no_leftovers(tmp_path, {"d.csv", "out.csv"})


@pytest.mark.skipif(
    os.name != "posix" or os.geteuid() == 0, reason="needs POSIX permissions and a non-root user"
)
def test_folder_without_write_permission(tmp_path):
    src = simple_csv(tmp_path)
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        with pytest.raises(ExportError, match="permission denied") as info:
            export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), locked / "out.csv")
        assert "out.csv" in str(info.value)
        assert list(locked.iterdir()) == []
    finally:
        locked.chmod(0o700)


def test_permission_denied_simulated(tmp_path, monkeypatch):
    # Runs as root too, where the folder test above is skipped.
    def refuse(*_args, **_kwargs):
        raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))

    src = simple_csv(tmp_path)
    monkeypatch.setattr(atomic.tempfile, "mkstemp", refuse)
    with pytest.raises(ExportError, match=r"out\.csv: permission denied"):
        export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), tmp_path / "out.csv")
    monkeypatch.undo()
    no_leftovers(tmp_path, {"d.csv"})


def fail_disk_full(*_args, **_kwargs):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


@pytest.mark.parametrize("kind", ["delimited", "parquet", "excel", "audit", "html"])
def test_disk_full_leaves_nothing(tmp_path, monkeypatch, kind):
    folder = tmp_path / "out"
    folder.mkdir()
    target = folder / "result"
    frame = sample_frame()
    frame.to_parquet(tmp_path / "s.parquet")
    frame.to_excel(tmp_path / "s.xlsx", index=False)
    labels = list(frame["label"])
    csv_src = simple_csv(tmp_path)

    def table(name, kind):
        return FakeSource(tmp_path / name, kind, "", None, None, None, 4, tuple(frame.columns))

    calls = {
        "delimited": lambda: export_cleaned(
            csv_src, "label", ["a", "c"], np.zeros(2, bool), target
        ),
        "parquet": lambda: export_cleaned(
            table("s.parquet", "parquet"), "label", labels, np.zeros(4, bool), target
        ),
        "excel": lambda: export_cleaned(
            table("s.xlsx", "excel"), "label", labels, np.zeros(4, bool), target
        ),
        "audit": lambda: write_audit_jsonl(sample_events(), target),
        "html": lambda: write_summary_html(summary_for(csv_src), target),
    }
    call = calls[kind]
    monkeypatch.setattr(atomic.os, "write", fail_disk_full)
    with pytest.raises(ExportError, match="disk full") as info:
        call()
    monkeypatch.undo()
    assert str(target) in str(info.value)
    assert list(folder.iterdir()) == []


def test_disk_full_keeps_the_old_target(tmp_path, monkeypatch):
    src = simple_csv(tmp_path)
    target = tmp_path / "out.csv"
    target.write_bytes(b"yesterday")
    monkeypatch.setattr(atomic.os, "write", fail_disk_full)
    with pytest.raises(ExportError, match="disk full"):
        export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), target, overwrite=True)
    monkeypatch.undo()
    assert target.read_bytes() == b"yesterday"
    no_leftovers(tmp_path, {"d.csv", "out.csv"})


def test_failing_fsync_leaves_nothing(tmp_path, monkeypatch):
    def fail(_fd):
        raise OSError(errno.EIO, os.strerror(errno.EIO))

    monkeypatch.setattr(atomic.os, "fsync", fail)
    with pytest.raises(ExportError, match="input/output error"):
        write_audit_csv(sample_events(), tmp_path / "audit.csv")
    monkeypatch.undo()
    assert list(tmp_path.iterdir()) == []


def test_new_file_gets_usual_permissions(tmp_path):
    out = write_audit_csv(sample_events(), tmp_path / "audit.csv")
    mask = os.umask(0)
    os.umask(mask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~mask


# -- audit log ---------------------------------------------------------------------------------


def sample_events() -> list[dict]:
    base = {
        "time": "2025-01-02T03:04:05Z",
        "reviewer": "ana",
        "slack": [1.7, float("nan")],
        "zone": ["wrong_side", "clear"],
        "reason": "typo",
        "note": 'said "x", then |y|',
        "target": None,
    }
    return [
        {
            **base,
            "seq": 1,
            "action": "relabel",
            "rows": [3, 9],
            "row_ids": ["L3", "L9"],
            "before": ["cat", "cat|dog"],
            "after": ["dog", "dog"],
        },
        {
            **base,
            "seq": 2,
            "action": "exclude",
            "rows": [np.int64(4)],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "note": "line one\nline two",
        },
        {
            **base,
            "seq": 3,
            "action": "undo",
            "rows": [4],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "target": 2,
        },
        {
            **base,
            "seq": 4,
            "action": "redo",
            "rows": [4],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "target": 2,
        },
    ]


def test_audit_csv_one_record_per_event(tmp_path):
    events = sample_events()
    out = write_audit_csv(events, tmp_path / "audit.csv")
    rows = list(csv.DictReader(io.StringIO(out.read_text("utf-8"), newline="")))
    assert len(rows) == len(events)
    assert list(rows[0]) == list(AUDIT_COLUMNS)
    assert [r["action"] for r in rows] == ["relabel", "exclude", "undo", "redo"]
    assert json.loads(rows[0]["before"]) == ["cat", "cat|dog"]
    assert json.loads(rows[0]["slack"]) == [1.7, None]
    assert json.loads(rows[1]["rows"]) == [4]
    assert rows[1]["note"] == "line one\nline two"
    assert rows[2]["target"] == "2" and rows[0]["target"] == ""


def test_audit_jsonl_one_line_per_event(tmp_path):
    events = sample_events()
    out = write_audit_jsonl(events, tmp_path / "audit.jsonl")
    lines = out.read_text("utf-8").splitlines()
    assert len(lines) == len(events)
    parsed = [json.loads(line) for line in lines]
    assert [p["seq"] for p in parsed] == [1, 2, 3, 4]
    assert parsed[0]["after"] == ["dog", "dog"]
    assert parsed[1]["slack"] == [1.7, None]
    assert parsed[3]["action"] == "redo" and parsed[3]["target"] == 2


# -- HTML summary -----------------------------------------------------------------------------

PNG_1PX = bytes.fromhex(
    "89504e470d0a1a0a0000000d4948445200000001000000010806000000"
    "1f15c4890000000d49444154789c6360000002000100e221bc330000000049454e44ae426082"
)


def summary_for(src) -> dict:
    return {
        "source_path": str(src.path),
        "source_sha256": "ab" * 32,
        "reviewer": "ana <b>",
        "label_column": "label",
        "settings": {"kernel": "rbf", "C": 1.0, "gamma": "scale", "folds": 5},
        "counts_by_action": {"relabel": 7, "exclude": 3, "undo": 1},
        "counts_by_reason": {"typo": 6, "<script>alert(1)</script>": 4},
        "metrics": {"rows in margin": (120, 80), "held-out accuracy": (0.81, 0.9)},
        "changed_rows": [{"row_id": "L3", "before": "cat", "after": "<script>x</script>"}],
        "images": {"slack histogram": PNG_1PX},
    }


def test_summary_html_content_and_escaping(tmp_path):
    src = simple_csv(tmp_path)
    out = write_summary_html(summary_for(src), tmp_path / "summary.html")
    page = out.read_text("utf-8")
    assert "ab" * 32 in page
    assert str(src.path) in page
    assert ">7<" in page and ">3<" in page and ">relabel<" in page
    assert "held-out accuracy" in page and ">0.81<" in page and ">0.9<" in page
    assert CAUTION in page and "a person decides" in page
    assert reviewer.__version__ in page
    assert "<script>" not in page
    assert "&lt;script&gt;x&lt;/script&gt;" in page
    assert "ana &lt;b&gt;" in page
    assert "data:image/png;base64," in page
    # Self-contained: nothing fetched from elsewhere.
    assert "http://" not in page and "https://" not in page and "<link" not in page


def test_summary_requires_fingerprint(tmp_path):
    with pytest.raises(ExportError, match="source_sha256"):
        write_summary_html({"source_path": "x.csv"}, tmp_path / "s.html")


# -- any table the csv module writes survives --------------------------------------------------

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

# A bare "\r" is left out: the csv module does not quote it under a "\n" line terminator,
# so the file it writes would not read back as it was meant.
_cell_text = (
    st.lists(st.sampled_from(["a", "b", " ", ",", ";", '"', "\n", "\r\n", "\t", "é"]), max_size=5)
    .map("".join)
    .filter(lambda s: s.strip() != "")
)


@settings(
    max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    rows=st.lists(st.tuples(_cell_text, _cell_text), min_size=1, max_size=8),
    delimiter=st.sampled_from([",", ";", "\t", "|"]),
    line_break=st.sampled_from(["\n", "\r\n"]),
    new=st.lists(st.one_of(st.none(), _cell_text), min_size=8, max_size=8),
    drop=st.lists(st.booleans(), min_size=8, max_size=8),
    keep=st.booleans(),
)
def test_random_tables_match_the_csv_module(tmp_path, rows, delimiter, line_break, new, drop, keep):
    buffer = io.StringIO()
    csv.writer(buffer, delimiter=delimiter, lineterminator=line_break).writerows(
        [("label", "text"), *rows]
    )
    raw = buffer.getvalue().encode("utf-8")
    n = len(rows)
    src = delimited_source(tmp_path / "r.csv", raw, delimiter, "utf-8", ("label", "text"), n)
    labels = [new[i] if new[i] is not None else rows[i][0] for i in range(n)]
    excluded = np.array(drop[:n])
    out = tmp_path / "o.csv"
    export_cleaned(
        src,
        "label",
        labels,
        excluded,
        out,
        overwrite=True,
        keep_excluded=keep,
        source_labels=[r[0] for r in rows],
    )
    # Reference reader: Python's csv module.
    got = list(
        csv.reader(io.StringIO(out.read_bytes().decode("utf-8"), newline=""), delimiter=delimiter)
    )
    if keep:
        want = [["label", "text", "review_excluded"]] + [
            [labels[i], rows[i][1], "true" if excluded[i] else "false"] for i in range(n)
        ]
    else:
        want = [["label", "text"]] + [[labels[i], rows[i][1]] for i in range(n) if not excluded[i]]
    assert got == want
    if keep:
        return
    kept_same = [i for i in range(n) if not excluded[i] and labels[i] == rows[i][0]]
    text = out.read_bytes()
    for i in kept_same:  # untouched records appear verbatim
        one = io.StringIO()
        csv.writer(one, delimiter=delimiter, lineterminator=line_break).writerow(rows[i])
        assert one.getvalue().encode("utf-8") in text
