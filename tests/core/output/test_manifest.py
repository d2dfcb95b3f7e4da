"""The export set and its manifest: written last, so a mismatched set is detectable."""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pytest

from reviewer.core.errors import ExportError
from reviewer.core.output import export as ex
from reviewer.core.output.manifest import manifest_path_for, verify_manifest
from tests.core.output.builders import sample_events, simple_csv, summary_for


def export_all(tmp_path, labels, **kw):
    src = simple_csv(tmp_path)
    return ex.export_set(
        src,
        "label",
        labels,
        np.zeros(2, bool),
        tmp_path / "out.csv",
        events=sample_events(),
        audit=tmp_path / "audit.csv",
        report=tmp_path / "report.html",
        summary=summary_for(src),
        **kw,
    )


def test_manifest_is_written_last_and_names_every_file(tmp_path):
    written = export_all(tmp_path, ["a", "c"])
    names = [p.name for p in written]
    assert names == ["out.csv", "audit.csv", "report.html", "out.csv.manifest.json"]
    manifest = json.loads(written[-1].read_text("utf-8"))
    assert manifest["event_seq"] == 4  # the last event the audit log holds
    assert [f["role"] for f in manifest["files"]] == ["cleaned", "audit", "report"]
    for entry, path in zip(manifest["files"], written[:3], strict=True):
        # Reference: hashlib's SHA-256 of the bytes on disk.
        assert entry["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
        assert entry["bytes"] == path.stat().st_size
    assert manifest["source"]["path"].endswith("d.csv")
    assert verify_manifest(written[-1]) == []
    page = (tmp_path / "report.html").read_text("utf-8")
    assert str(tmp_path / "out.csv") in page and str(tmp_path / "audit.csv") in page


def test_a_changed_or_missing_file_is_detected(tmp_path):
    written = export_all(tmp_path, ["a", "c"])
    (tmp_path / "audit.csv").write_bytes(b"edited by hand\r\n")
    (tmp_path / "report.html").unlink()
    problems = verify_manifest(written[-1])
    assert len(problems) == 2
    assert "audit file" in problems[0] and "differs" in problems[0]
    assert "report file report.html is missing" in problems[1]


def test_an_export_stopped_half_way_leaves_a_detectable_set(tmp_path, monkeypatch):
    export_all(tmp_path, ["a", "c"])

    def fail(*_args, **_kwargs):
        raise ExportError("Cannot write report.html: disk full")

    monkeypatch.setattr(ex, "write_summary_html", fail)
    with pytest.raises(ExportError, match="disk full"):
        export_all(tmp_path, ["b", "b"], overwrite=True)
    # The new cleaned file and audit log are in place, the manifest still the old set's.
    assert (tmp_path / "out.csv").read_bytes() == b"label\nb\nb\n"
    problems = verify_manifest(manifest_path_for(tmp_path / "out.csv"))
    assert problems and "cleaned file" in problems[0]


def test_a_file_of_the_users_under_the_manifest_name_is_refused_before_writing(tmp_path):
    mine = tmp_path / "out.csv.manifest.json"
    mine.write_text("my notes")
    with pytest.raises(ExportError, match="not a manifest"):
        export_all(tmp_path, ["a", "c"])
    assert mine.read_text() == "my notes"
    assert not (tmp_path / "out.csv").exists()


def test_every_target_is_checked_before_anything_is_written(tmp_path):
    (tmp_path / "report.html").write_text("yesterday")
    with pytest.raises(ExportError, match="--overwrite"):
        export_all(tmp_path, ["a", "c"])
    assert not (tmp_path / "out.csv").exists() and not (tmp_path / "audit.csv").exists()
