"""The audit log: one record per event (undo and redo included), as CSV or JSON Lines.

The CSV is meant for people, who open it in a spreadsheet, so a text cell that a
spreadsheet would run as a formula is neutralised (see ``neutralise_formula``). The JSON
Lines file is for programs and keeps every value exactly.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from reviewer.core.output.atomic import atomic_write_bytes
from reviewer.core.plain import plain
from reviewer.core.values import looks_like_formula

__all__ = ["AUDIT_COLUMNS", "neutralise_formula", "write_audit_csv", "write_audit_jsonl"]

#: Audit columns in the order they are written; keys beyond these follow, sorted.
AUDIT_COLUMNS: tuple[str, ...] = (
    "seq",
    "time",
    "reviewer",
    "action",
    "rows",
    "row_ids",
    "before",
    "after",
    "slack",
    "zone",
    "reason",
    "note",
    "target",
)


def neutralise_formula(text: str) -> str:
    """``text`` with a leading single quote if a spreadsheet would run it as a formula
    (OWASP's CSV-injection guidance; plain numbers such as "-1.5" stay as they are)."""
    return "'" + text if looks_like_formula(text) else text


def _columns(events: Sequence[Mapping[str, Any]]) -> list[str]:
    extra = sorted({str(k) for e in events for k in e} - set(AUDIT_COLUMNS))
    return [*AUDIT_COLUMNS, *extra]


def write_audit_csv(
    events: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write one CSV record per event (undo and redo included), UTF-8, RFC 4180 quoting.

    Columns: AUDIT_COLUMNS, then any other event keys sorted. List values (rows, row_ids,
    before, after, slack, zone) are stored as JSON text, e.g. ``["a", null]``, because a
    label may itself contain any separator; scalars are written as text, None as empty.
    A text cell that would start a spreadsheet formula gets a leading single quote
    (``neutralise_formula``); JSON list cells start with ``[`` and need none.
    ``protect`` names files the log must never replace (the source data file).
    """
    events = list(events)
    columns = _columns(events)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(columns)
    for event in events:
        writer.writerow([_csv_cell(event.get(c)) for c in columns])
    data = buffer.getvalue().encode("utf-8")
    return atomic_write_bytes(
        out_path, data, overwrite=overwrite, protect=tuple(Path(p) for p in protect)
    )


def _csv_cell(value: Any) -> str:
    value = plain(value)
    if value is None:
        return ""
    if isinstance(value, (list, dict)):
        return json.dumps(value, ensure_ascii=False)
    return neutralise_formula(str(value))


def write_audit_jsonl(
    events: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write one JSON object per line per event (undo and redo included), UTF-8.

    Keys in AUDIT_COLUMNS order, then other keys sorted; missing keys are written as null;
    NaN and infinities as null; numpy values as plain numbers. Values are kept exactly.
    """
    events = list(events)
    columns = _columns(events)
    lines = [
        json.dumps({c: plain(e.get(c)) for c in columns}, ensure_ascii=False, allow_nan=False)
        for e in events
    ]
    data = "".join(line + "\n" for line in lines).encode("utf-8")
    return atomic_write_bytes(
        out_path, data, overwrite=overwrite, protect=tuple(Path(p) for p in protect)
    )
