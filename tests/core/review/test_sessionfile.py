"""Session file: meta, events, fits, schema versions, the writer lock and the open checks."""

from __future__ import annotations

import os
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.core.errors import SessionError, SessionLockedError
from reviewer.core.review import sessionfile
from reviewer.core.review.editlog import LabelState
from reviewer.core.review.sessionfile import SessionFile

ROOT = Path(__file__).resolve().parents[3]
META = {
    "source_path": "/data/iris-like.csv",
    "source_sha256": "ab" * 32,
    "label_column": "species",
    "id_column": "sample_id",
    "roles": {"species": "label", "sample_id": "id", "petal": "numeric"},
    "settings": {"kernel": "rbf", "C": 1.0},
    "reviewer": "Dana",
    "app_version": "0.1.0",
}


@pytest.fixture
def session(tmp_path: Path) -> Path:
    """A session file with three edits and both fit slots filled, closed again."""
    path = tmp_path / "review.mrs"
    state = LabelState(np.array(["a", "b", "a", "b"], dtype=object))
    with SessionFile.create(path, META) as sf:
        for action, rows in (("relabel", [0]), ("exclude", [1, 2]), ("confirm", [3])):
            state.apply(sf.append_event(state.make_edit(action, rows, reviewer="Dana", label="b")))
        sf.save_fit("baseline", {"C": 1.0}, {"errors": 3}, pd.DataFrame({"slack": [0.0, 1.5]}))
        sf.save_fit("latest", {"C": 2.0}, {"errors": 1}, pd.DataFrame({"slack": [0.2, 0.4]}))
    return path


def test_meta_round_trips_with_created_time(session):
    with SessionFile.open(session) as sf:
        meta = sf.meta
        assert {k: meta[k] for k in META} == META
        assert meta["created"].endswith("Z")
        sf.set_meta("settings", {"kernel": "linear"})
    with SessionFile.open(session, read_only=True) as sf:
        assert sf.meta["settings"] == {"kernel": "linear"}
        with pytest.raises(SessionError, match="read-only"):
            sf.set_meta("reviewer", "Lee")


def test_events_get_consecutive_seqs_and_come_back_equal(session):
    with SessionFile.open(session) as sf:
        events = sf.events()
        assert [e.seq for e in events] == [1, 2, 3]
        assert [e.action for e in events] == ["relabel", "exclude", "confirm"]
        assert events[1].rows == (1, 2) and events[1].before == ("open", "open")
        state = LabelState.replay(np.array(["a", "b", "a", "b"], dtype=object), events)
        added = sf.append_event(state.make_undo(reviewer="Dana"))
        assert (added.seq, added.target) == (4, 3)
        assert sf.events(after_seq=3) == [added]
        assert sf.last_seq() == 4


def test_fit_slots_hold_the_newest_fit_and_history_keeps_all(session):
    with SessionFile.open(session) as sf:
        sf.save_fit("latest", {"C": 4.0}, {"errors": 0}, pd.DataFrame({"slack": [9.0]}))
        latest = sf.load_fit("latest")
        baseline = sf.load_fit("baseline")
        history = sf.fit_history()
    assert latest.settings == {"C": 4.0} and latest.rows["slack"].tolist() == [9.0]
    assert baseline.summary == {"errors": 3}
    pd.testing.assert_frame_equal(baseline.rows, pd.DataFrame({"slack": [0.0, 1.5]}))
    assert [h.settings["C"] for h in history] == [1.0, 2.0, 4.0]
    assert all(h.last_seq == 3 for h in history) and history[0].rows is None


def test_unknown_slot_and_existing_file_are_refused(session, tmp_path):
    with SessionFile.open(session) as sf, pytest.raises(SessionError, match="slot"):
        sf.save_fit("previous", {}, {}, pd.DataFrame())
    with pytest.raises(SessionError, match="already exists"):
        SessionFile.create(session, META)


def test_second_writer_in_same_process_is_refused_and_reader_allowed(session):
    with SessionFile.open(session) as writer:
        with pytest.raises(SessionLockedError) as err:
            SessionFile.open(session)
        assert str(session) in str(err.value) and "elsewhere" in str(err.value)
        with SessionFile.open(session, read_only=True) as reader:
            writer.append_event(LabelState(["a"] * 4).make_edit("confirm", [0], reviewer="x"))
            assert reader.last_seq() == 4  # a reader sees commits made after it opened
    with SessionFile.open(session) as again:  # released on close
        assert not again.read_only


HOLDER = textwrap.dedent(
    """
    import sys, time
    sys.path.insert(0, sys.argv[2])
    from reviewer.core.review.sessionfile import SessionFile
    sf = SessionFile.open(sys.argv[1])
    print("holding", flush=True)
    time.sleep(120)
    """
)


def test_second_writer_in_another_process_is_refused_until_that_process_dies(session):
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLDER, str(session), str(ROOT)],
        stdout=subprocess.PIPE,
        text=True,
    )
    try:
        assert holder.stdout.readline().strip() == "holding"
        with pytest.raises(SessionLockedError, match="open for writing elsewhere"):
            SessionFile.open(session)
        with SessionFile.open(session, read_only=True) as reader:
            assert len(reader.events()) == 3
    finally:
        holder.kill()  # SIGKILL: no clean-up code runs in the holder
        holder.wait()
    with SessionFile.open(session) as sf:
        assert not sf.read_only


def _refused_untouched(path: Path, match: str) -> None:
    before = path.read_bytes()
    for read_only in (False, True):
        with pytest.raises(SessionError, match=match) as err:
            SessionFile.open(path, read_only=read_only)
        assert str(path) in str(err.value)
        assert path.read_bytes() == before


def test_random_bytes_are_refused_and_left_as_they_were(tmp_path):
    path = tmp_path / "noise.mrs"
    path.write_bytes(np.random.default_rng(3).bytes(8192))
    _refused_untouched(path, "not a session file")


def test_empty_file_is_refused(tmp_path):
    path = tmp_path / "empty.mrs"
    path.write_bytes(b"")
    _refused_untouched(path, "not a session file")


def test_truncated_file_is_refused_and_left_as_it_was(session):
    with SessionFile.open(session) as sf:  # make it several pages long
        sf.save_fit("latest", {}, {}, pd.DataFrame({"x": np.arange(20_000.0)}))
    data = session.read_bytes()
    page = int.from_bytes(data[16:18], "big")
    session.write_bytes(data[: (len(data) // page // 2) * page])
    _refused_untouched(session, "truncated")


def test_damaged_page_fails_the_integrity_check_and_is_left_alone(session):
    with SessionFile.open(session) as sf:
        sf.save_fit("latest", {}, {}, pd.DataFrame({"x": np.arange(20_000.0)}))
    data = bytearray(session.read_bytes())
    page = int.from_bytes(data[16:18], "big")
    # Scribble over the b-tree headers of pages 2 and 3 (tables' root pages).
    data[page : page + 12] = b"\xff" * 12
    data[2 * page : 2 * page + 12] = b"\xff" * 12
    session.write_bytes(bytes(data))
    _refused_untouched(session, "damaged")


def test_foreign_sqlite_file_is_refused(tmp_path):
    path = tmp_path / "other.db"
    with sqlite3.connect(path) as conn:
        conn.execute("CREATE TABLE t (x)")
    conn.close()
    _refused_untouched(path, "not a Margin Reviewer session")


def test_newer_schema_is_refused_with_versions_named(session):
    conn = sqlite3.connect(session)
    conn.execute("PRAGMA user_version = 99")
    conn.close()
    _refused_untouched(session, "schema version 99.*reads up to 2")


def test_older_schema_is_upgraded_on_open_for_writing(session, monkeypatch):
    def add_labels_table(conn: sqlite3.Connection) -> None:
        conn.execute("CREATE TABLE class_names (name TEXT)")

    # Pretend this program knows a schema 3 that older files cannot be read as; the file
    # on disk is version 2.
    monkeypatch.setitem(sessionfile.MIGRATIONS, 3, add_labels_table)
    monkeypatch.setattr(sessionfile, "READABLE_FROM", 3)
    with pytest.raises(SessionError, match="cannot be upgraded"):
        SessionFile.open(session, read_only=True)
    with SessionFile.open(session) as sf:
        assert len(sf.events()) == 3
    conn = sqlite3.connect(session)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 3
    assert conn.execute("SELECT count(*) FROM class_names").fetchone()[0] == 0
    conn.close()


def test_failed_upgrade_leaves_the_old_version(session, monkeypatch):
    def broken(conn: sqlite3.Connection) -> None:
        conn.execute("CREATE TABLE half_done (x)")
        raise RuntimeError("upgrade step failed")

    monkeypatch.setitem(sessionfile.MIGRATIONS, 3, broken)
    with pytest.raises(RuntimeError):
        SessionFile.open(session)
    conn = sqlite3.connect(session)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 2
    names = {r[0] for r in conn.execute("SELECT name FROM sqlite_master")}
    assert "half_done" not in names
    conn.close()


def test_read_only_location_opens_read_only_with_a_message(session, monkeypatch):
    folder = session.parent
    os.chmod(session, 0o444)
    os.chmod(folder, 0o555)
    try:
        probe = folder / "probe"
        try:
            probe.write_text("x")
            blocked = False
            probe.unlink()
        except OSError:
            blocked = True
        if not blocked:
            # Running as root: permission bits do not stop writes, so the folder is not
            # really read-only. Fake only the permission check; the rest is real.
            monkeypatch.setattr(sessionfile, "_location_writable", lambda path: False)
        with SessionFile.open(session) as sf:
            assert sf.read_only
            assert "not writable" in sf.read_only_reason
            assert len(sf.events()) == 3
            assert sf.load_fit("latest").settings == {"C": 2.0}
            with pytest.raises(SessionError, match="read-only"):
                sf.append_event(LabelState(["a"]).make_edit("confirm", [0], reviewer="x"))
    finally:
        os.chmod(folder, 0o755)
        os.chmod(session, 0o644)


def test_closed_file_refuses_use(session):
    sf = SessionFile.open(session)
    sf.close()
    sf.close()
    with pytest.raises(SessionError, match="closed"):
        sf.events()


def test_saved_event_cannot_be_appended_twice_and_numpy_values_are_stored(session):
    with SessionFile.open(session) as sf:
        first = sf.events()[0]
        with pytest.raises(SessionError, match="already in the log"):
            sf.append_event(first)
        ev = LabelState(np.array([1, 2], dtype=object)).make_edit(
            "confirm", [np.int64(1)], reviewer="x", slack=[np.float32(0.5)]
        )
        saved = sf.append_event(ev)
        assert sf.events(after_seq=3) == [saved] and saved.slack == (0.5,)


def test_fit_worker_thread_may_write_while_window_thread_appends(session):
    import threading

    errors: list[BaseException] = []
    with SessionFile.open(session) as sf:

        def worker() -> None:
            try:
                for i in range(5):
                    sf.save_fit("latest", {"i": i}, {}, pd.DataFrame({"slack": [float(i)]}))
            except BaseException as exc:  # reported to the main thread below
                errors.append(exc)

        t = threading.Thread(target=worker)
        t.start()
        state = LabelState(["a"] * 4)
        for _ in range(5):
            sf.append_event(state.make_edit("confirm", [0], reviewer="x"))
        t.join()
        assert not errors
        assert sf.last_seq() == 8 and sf.load_fit("latest").settings == {"i": 4}


def test_create_in_a_missing_folder_names_the_file(tmp_path):
    target = tmp_path / "no-such-folder" / "s.mrs"
    with pytest.raises(SessionError, match=r"cannot create session file .*s\.mrs"):
        SessionFile.create(target, META)
