"""The audit log: one record per event, as CSV for people and JSON Lines for programs."""

from __future__ import annotations

import csv
import io
import json

from reviewer.core.output.audit import AUDIT_COLUMNS, write_audit_csv, write_audit_jsonl
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
