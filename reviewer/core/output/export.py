"""Export, the entry to the output stage: one call writes the whole set, manifest last.

The writers live in their own modules (cleaned, delimited, tables, audit, report,
manifest); this module names the ones callers use and puts them in order. Every file goes
through reviewer.core.output.atomic, so each is complete or absent, never half written,
and never lands on the source data file.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from reviewer.core.data.loading import SourceInfo
from reviewer.core.output.atomic import check_target
from reviewer.core.output.audit import AUDIT_COLUMNS, write_audit_csv, write_audit_jsonl
from reviewer.core.output.cleaned import export_cleaned
from reviewer.core.output.manifest import (
    check_manifest_target,
    manifest_path_for,
    verify_manifest,
    write_manifest,
)
from reviewer.core.output.report import CAUTION, write_summary_html

__all__ = [
    "AUDIT_COLUMNS",
    "CAUTION",
    "export_cleaned",
    "export_set",
    "manifest_path_for",
    "verify_manifest",
    "write_audit_csv",
    "write_audit_jsonl",
    "write_manifest",
    "write_summary_html",
]


def _is_jsonl(path: str | os.PathLike[str]) -> bool:
    return os.fspath(path).lower().endswith((".jsonl", ".json"))


def export_set(
    source: SourceInfo,
    label_column: str,
    labels: Sequence[str | None],
    excluded: np.ndarray,
    out: str | os.PathLike[str],
    *,
    source_labels: Sequence[Any] | None = None,
    events: Sequence[Mapping[str, Any]] = (),
    audit: str | os.PathLike[str] | None = None,
    report: str | os.PathLike[str] | None = None,
    summary: Mapping[str, Any] | None = None,
    keep_excluded: bool = False,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
    session_path: str | os.PathLike[str] | None = None,
) -> list[Path]:
    """Cleaned table, optional audit log (CSV, or JSON Lines for .jsonl/.json) and report.

    Every target is checked before anything is written, then the files are written in
    that order and the manifest (manifest_path_for(out)) last, naming each file with its
    SHA-256 and the seq of the last event in ``events``. Returns the paths written, the
    manifest last. ``summary`` feeds the report (see write_summary_html); its cleaned_path
    and audit_path are filled in here.
    """
    guard = (Path(source.path), *(Path(p) for p in protect))
    for target in (audit, report):
        if target is not None:
            check_target(target, overwrite=overwrite, protect=guard)
    check_manifest_target(manifest_path_for(out))
    written: dict[str, Path] = {}
    written["cleaned"] = export_cleaned(
        source,
        label_column,
        labels,
        excluded,
        out,
        source_labels=source_labels,
        keep_excluded=keep_excluded,
        overwrite=overwrite,
    )
    events = list(events)
    if audit is not None:
        writer = write_audit_jsonl if _is_jsonl(audit) else write_audit_csv
        written["audit"] = writer(events, audit, overwrite=overwrite, protect=guard)
    if report is not None:
        page = dict(summary or {})
        page.setdefault("source_path", str(source.path))
        page.setdefault("source_sha256", source.sha256)
        page["cleaned_path"] = str(written["cleaned"])
        if "audit" in written:
            page["audit_path"] = str(written["audit"])
        written["report"] = write_summary_html(page, report, overwrite=overwrite, protect=guard)
    seqs = [int(e["seq"]) for e in events if e.get("seq") is not None]
    manifest = write_manifest(
        written,
        event_seq=max(seqs) if seqs else None,
        source_path=source.path,
        source_sha256=source.sha256,
        session_path=session_path,
        protect=guard,
    )
    return [*written.values(), manifest]
