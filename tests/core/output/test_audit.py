"""The audit log: one record per event, as CSV for people and JSON Lines for programs."""

from __future__ import annotations

import csv
import io
import json

import pytest

from reviewer.core.output.audit import (
    AUDIT_COLUMNS,
    neutralise_formula,
    write_audit_csv,
    write_audit_jsonl,
)
from tests.core.output.builders import (
    sample_events,
)


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


def test_formula_reason_is_neutralised_in_the_csv_and_numbers_stay(tmp_path):
    # OWASP's CSV-injection guidance: a cell starting with =, +, -, @, tab or carriage
    # return is prefixed with a single quote so a spreadsheet shows it as text.
    events = sample_events()[:1]
    events[0] = {
        **events[0],
        "reason": "=1+1",
        "note": "@SUM(A1:A2)",
        "reviewer": "-ana",
        "target": -1.5,
        "extra_tab": "\tcmd",
        "extra_cr": "\rcmd",
        "extra_plus": "+3",
    }
    out = write_audit_csv(events, tmp_path / "audit.csv")
    row = next(csv.DictReader(io.StringIO(out.read_bytes().decode("utf-8"), newline="")))
    assert row["reason"] == "'=1+1"
    assert row["note"] == "'@SUM(A1:A2)"
    assert row["reviewer"] == "'-ana"
    assert row["extra_tab"] == "'\tcmd" and row["extra_cr"] == "'\rcmd"
    # Numbers stay numbers: a spreadsheet reads them as values, not formulas.
    assert row["target"] == "-1.5" and row["extra_plus"] == "+3"
    # List cells are JSON text starting with "[", harmless, and keep the labels exactly.
    assert json.loads(row["before"]) == ["cat", "cat|dog"]


def test_jsonl_keeps_formula_like_values_exactly(tmp_path):
    events = [{**sample_events()[0], "reason": "=1+1", "after": ["=HYPERLINK(x)", "-2"]}]
    out = write_audit_jsonl(events, tmp_path / "audit.jsonl")
    parsed = json.loads(out.read_text("utf-8"))
    assert parsed["reason"] == "=1+1" and parsed["after"] == ["=HYPERLINK(x)", "-2"]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("=1+1", "'=1+1"),
        ("-1.5", "-1.5"),
        ("+1e-3", "+1e-3"),
        ("-", "'-"),
        ("-inf", "'-inf"),
        ("@x", "'@x"),
        ("a=b", "a=b"),
        ("", ""),
    ],
)
def test_neutralise_formula(text, expected):
    assert neutralise_formula(text) == expected
