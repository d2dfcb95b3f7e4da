"""Cleaned delimited text: rebuilt from the source bytes, only changed labels differ."""

from __future__ import annotations

import csv
import io

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.loading import MISSING_MARKERS, label_strings, load_table
from reviewer.core.errors import ExportError
from reviewer.core.output.cleaned import export_cleaned
from tests.core.output.builders import (
    assert_cells,
    delimited_source,
    no_leftovers,
    read_text_table,
)

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


def test_a_field_read_as_missing_is_no_change(tmp_path):
    # Every marker the loader reads as missing (pandas' default na_values, from its read_csv
    # documentation, plus our extra spellings) must also be "missing" to the exporter: a
    # None label there is no change, so the file comes back byte for byte.
    markers = [m for m in MISSING_MARKERS if m != ""]
    lines = ["label,x", *(f"{m},{i}" for i, m in enumerate(markers)), ",99", "cat,100"]
    raw = ("\n".join(lines) + "\n").encode("utf-8")
    path = tmp_path / "m.csv"
    path.write_bytes(raw)
    loaded = load_table(path)
    labels = list(label_strings(loaded.frame["label"]))
    assert labels[:-1] == [None] * (len(markers) + 1)  # the loader reads them all as missing
    assert loaded.source.n_rows == len(markers) + 2
    out = export_cleaned(
        loaded.source, "label", labels, np.zeros(len(labels), bool), tmp_path / "o.csv"
    )
    assert out.read_bytes() == raw
    # A None label where the field held a real label empties that field, and only that one.
    labels[-1] = None
    out = export_cleaned(
        loaded.source, "label", labels, np.zeros(len(labels), bool), tmp_path / "o2.csv"
    )
    assert out.read_bytes() == raw.replace(b"\ncat,100\n", b"\n,100\n")


def test_pandas_default_missing_markers_are_all_in_the_one_list():
    # pandas' own default list (the one its read_csv documentation prints) is part of ours,
    # so an upgrade that adds a spelling shows up here instead of as a silent label change.
    from pandas._libs.parsers import STR_NA_VALUES

    assert set(STR_NA_VALUES) <= set(MISSING_MARKERS)


def test_formula_like_labels_are_kept_exactly_in_the_cleaned_file(tmp_path):
    # The cleaned file is data for pipelines: unlike the audit CSV, nothing is escaped.
    raw = b"label,x\n=1+1,1\n-2,2\nb,3\n"
    src = delimited_source(tmp_path / "f.csv", raw, ",", "utf-8", ("label", "x"), 3)
    out = export_cleaned(
        src,
        "label",
        ["=1+1", "-2", "@SUM(A1)"],
        np.zeros(3, bool),
        tmp_path / "o.csv",
        source_labels=["=1+1", "-2", "b"],
    )
    assert out.read_bytes() == b"label,x\n=1+1,1\n-2,2\n@SUM(A1),3\n"
