"""Where and how files are written: all or nothing, never onto the source."""

from __future__ import annotations

import errno
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
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


def test_refusal_names_the_command_line_option(tmp_path):
    src = simple_csv(tmp_path)
    target = tmp_path / "out.csv"
    target.write_bytes(b"yesterday")
    with pytest.raises(ExportError, match=r"pass --overwrite \(overwrite=True in Python\)"):
        export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), target)


# -- leftovers of killed exports ----------------------------------------------------------------

# A child process that starts an atomic write of 1 MiB and then, half way, either kills
# itself (as kill -9 would) or says "writing" and waits for a line on stdin before finishing.
_CHILD = """
import os, signal, sys
from reviewer.core.output.atomic import atomic_write
mode, target = sys.argv[1], sys.argv[2]
def write(stream):
    stream.write(b"x" * (1 << 20))
    if mode == "kill":
        os.kill(os.getpid(), signal.SIGKILL)
    print("writing", flush=True)
    sys.stdin.readline()
    stream.write(b"done")
atomic_write(target, write)
print("placed", flush=True)
"""


def _child(mode: str, target: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-c", _CHILD, mode, str(target)],
        stdin=subprocess.PIPE,
        stdout=subprocess.PIPE,
        text=True,
        cwd=Path(__file__).resolve().parents[3],
    )


def _temporaries(folder: Path) -> list[Path]:
    return sorted(p for p in folder.iterdir() if p.name.endswith(".partial"))


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX signals")
def test_a_killed_export_leaves_a_temporary_the_next_export_removes(tmp_path):
    src = simple_csv(tmp_path)
    child = _child("kill", tmp_path / "out.csv")
    child.communicate(timeout=60)
    assert child.returncode == -signal.SIGKILL
    left = _temporaries(tmp_path)
    assert len(left) == 1 and left[0].name.startswith(".out.csv.mr-")
    assert left[0].stat().st_size == 1 << 20  # the full-size leftover a user would find
    assert not (tmp_path / "out.csv").exists()
    # Any later export into the folder, of any file, cleans it up.
    export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), tmp_path / "other.csv")
    no_leftovers(tmp_path, {"d.csv", "other.csv"})


@pytest.mark.skipif(atomic.fcntl is None, reason="needs advisory file locks")
def test_a_running_export_keeps_its_temporary(tmp_path):
    # Two exports at once: the second must not take the first's temporary for a leftover.
    src = simple_csv(tmp_path)
    child = _child("wait", tmp_path / "big.csv")
    try:
        assert child.stdout.readline().strip() == "writing"
        running = _temporaries(tmp_path)
        assert len(running) == 1
        export_cleaned(src, "label", ["a", "c"], np.zeros(2, bool), tmp_path / "out.csv")
        assert atomic.remove_stale_temporaries(tmp_path) == []
        assert _temporaries(tmp_path) == running
        out, _ = child.communicate("go\n", timeout=60)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode == 0 and out.strip() == "placed"
    assert (tmp_path / "big.csv").read_bytes() == b"x" * (1 << 20) + b"done"
    no_leftovers(tmp_path, {"d.csv", "out.csv", "big.csv"})


def test_only_our_own_leftovers_are_removed(tmp_path):
    old = time.time() - 2 * atomic.LEGACY_STALE_SECONDS
    legacy = tmp_path / ".out.csv.k2j4h1x9.partial"  # an earlier version's name, stale
    fresh = tmp_path / ".out.csv.a8b7c6d5.partial"  # same pattern, written to just now
    users = [tmp_path / ".notes.partial", tmp_path / "draft.partial", tmp_path / "x.mr-1-2.partial"]
    for path in (legacy, fresh, *users):
        path.write_bytes(b"data")
    for path in (legacy, *users):
        os.utime(path, (old, old))
    removed = atomic.remove_stale_temporaries(tmp_path)
    assert removed == [legacy]
    assert fresh.exists() and all(p.exists() for p in users)


def test_command_line_export_onto_an_existing_file_names_the_option(tmp_path):
    from reviewer.core.door import ReviewSession

    root = Path(__file__).resolve().parents[3]
    data = tmp_path / "lots.csv"
    pd.read_csv(root / "reviewer" / "demo_data" / "coffee_lots.csv", nrows=60).to_csv(
        data, index=False
    )
    with ReviewSession.open(data, label="grade", id_column="lot_id") as session:
        session.exclude([0])
        session_file = session.session_path
    out = tmp_path / "out.csv"
    out.write_text("yesterday")
    proc = subprocess.run(
        [sys.executable, "-m", "reviewer", "export", str(session_file), "--out", str(out)],
        cwd=root,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 2
    assert proc.stderr.startswith("error:") and "--overwrite" in proc.stderr
    assert "overwrite=True to" not in proc.stderr and out.read_text() == "yesterday"
