"""Where and how files are written: all or nothing, never onto the source."""

from __future__ import annotations

import errno
import os

import numpy as np
import pytest

from reviewer.core.data.loading import SourceInfo
from reviewer.core.errors import ExportError
from reviewer.core.output import atomic
from reviewer.core.output.audit import write_audit_csv, write_audit_jsonl
from reviewer.core.output.cleaned import export_cleaned
from reviewer.core.output.report import write_summary_html
from tests.core.output.builders import (
    no_leftovers,
    sample_events,
    sample_frame,
    simple_csv,
    summary_for,
)


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
    monkeypatch.setattr(atomic.os, "open", refuse)
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
        return SourceInfo(tmp_path / name, kind, "", None, None, None, 4, tuple(frame.columns))

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
