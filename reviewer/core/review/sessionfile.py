"""The session file: one SQLite file per reviewed data set, holding meta, the edit log and fits.

Durability: WAL journal with ``synchronous=FULL``. Each `append_event` is its own
transaction and returns only after COMMIT, i.e. after the WAL frame is written and
fsynced. A process killed with SIGKILL cannot lose it (the bytes are in the OS once
COMMIT returns; fsync also covers power loss), and a frame half-written at the moment of
the kill fails its checksum and is ignored when the file is next opened, so an event is
either wholly there or absent. WAL rather than a rollback journal because a reader (the
command line exporting, a second window looking) can read while the writer commits,
and a commit is one append instead of journal + database writes.

Single writer: the writer holds ``fcntl.flock`` on the session file itself (see
`writerlock.py`); the OS drops it when the process dies, so a killed session never leaves
a stale lock. Readers take no lock. The schema and its migrations are in `schema.py`.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
import os
import sqlite3
import struct
import threading
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from reviewer.core.errors import SessionError
from reviewer.core.plain import plain
from reviewer.core.review.editlog import Event, read_legacy_names, utc_now
from reviewer.core.review.schema import MIGRATIONS, READABLE_FROM, schema_version
from reviewer.core.review.writerlock import _Lock
from reviewer.core.values import LEGACY_NAMES

APPLICATION_ID = 0x4D524731  # "MRG1": marks a SQLite file as one of ours
SLOTS = ("baseline", "latest", "edits")
META_KEYS = (
    "source_path",
    "source_sha256",
    "label_column",
    "id_column",
    "roles",
    "settings",
    "reviewer",
    "app_version",
    "created",
    "sheet",
    "vectors",  # the .npy vectors file: {"path", "sha256"}, or null
)
_SQLITE_MAGIC = b"SQLite format 3\x00"
# Autocommit mode: transactions are opened and closed explicitly. Access from several
# threads is serialised by SessionFile's own lock.
_CONNECT: dict[str, Any] = {
    "uri": True,
    "isolation_level": None,
    "check_same_thread": False,
    "timeout": 5.0,  # wait out a checkpoint or another reader instead of failing at once
}


@dataclass(frozen=True)
class FitRecord:
    """One saved fit. `rows` is the per-row DataFrame for slot loads, None in the history."""

    fit_id: int
    slot: str
    time: str
    last_seq: int
    settings: dict[str, Any]
    summary: dict[str, Any]
    rows: Any = None


def _location_writable(path: Path) -> bool:
    """Whether the process may write the file and create files beside it (WAL, lock)."""
    return os.access(path, os.W_OK) and os.access(path.parent, os.W_OK)


def _check_header(path: Path) -> None:
    """Refuse anything that is not a whole SQLite file, before SQLite touches it."""
    try:
        size = path.stat().st_size
        with open(path, "rb") as fh:
            header = fh.read(100)
    except OSError as exc:
        raise SessionError(f"session file {path} cannot be read: {exc}") from exc
    if len(header) < 100 or not header.startswith(_SQLITE_MAGIC):
        raise SessionError(f"{path} is not a session file (not a SQLite database)")
    page_size = struct.unpack(">H", header[16:18])[0]
    page_size = 65536 if page_size == 1 else page_size
    change_counter, n_pages = struct.unpack(">II", header[24:32])
    valid_for = struct.unpack(">I", header[92:96])[0]
    if page_size < 512 or size % page_size:
        raise SessionError(f"session file {path} is damaged: its size is not whole pages")
    # While a WAL file exists a checkpoint may be growing the file, so the size in the
    # header can run ahead of the bytes on disk for a moment; the integrity check covers it.
    wal_active = path.with_name(path.name + "-wal").exists()
    if not wal_active and valid_for == change_counter and size < n_pages * page_size:
        raise SessionError(
            f"session file {path} is truncated: {size} bytes, its header says {n_pages * page_size}"
        )


class SessionFile:
    """An open session file. Use `create` or `open`; close it (or use `with`)."""

    def __init__(self, path: Path, conn: sqlite3.Connection, lock: _Lock | None, note: str):
        self.path = path
        self._conn = conn
        self._lock = lock
        # One connection shared by the window thread and fit workers; this keeps their
        # statements and transactions from interleaving.
        self._mutex = threading.RLock()
        self.read_only_reason = note
        """Empty when writable; otherwise why the file is open read-only (for the window)."""

    # ---- opening -----------------------------------------------------------------------
    @classmethod
    def create(cls, path: str | os.PathLike[str], meta: dict[str, Any]) -> SessionFile:
        """Make a new session file (refuses to overwrite one) and open it for writing."""
        path = Path(path)
        if path.exists():
            raise SessionError(f"session file {path} already exists; open it instead")
        unknown = set(meta) - set(META_KEYS)
        if unknown:
            raise SessionError(f"unknown meta keys for {path}: {sorted(unknown)}")
        # Built under a temporary name and linked into place, so a crash while creating
        # never leaves a half-made session file under the real name.
        tmp = path.with_name(f".{path.name}.{os.getpid()}.creating")
        tmp.unlink(missing_ok=True)
        try:
            conn = sqlite3.connect(tmp, isolation_level=None)
            try:
                conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
                conn.execute("BEGIN")
                cls._migrate(conn, 0, path)
                rows = [("created", json.dumps(utc_now()))]
                rows += [(k, json.dumps(v)) for k, v in meta.items()]
                conn.executemany("INSERT OR REPLACE INTO meta(key, value) VALUES (?, ?)", rows)
                conn.execute("COMMIT")
            finally:
                conn.close()
        except (sqlite3.Error, OSError, TypeError, ValueError) as exc:
            tmp.unlink(missing_ok=True)
            raise SessionError(f"cannot create session file {path}: {exc}") from exc
        try:
            os.link(tmp, path)
        except FileExistsError as exc:
            raise SessionError(f"session file {path} already exists; open it instead") from exc
        except OSError:
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)
        return cls.open(path)

    @classmethod
    def open(cls, path: str | os.PathLike[str], read_only: bool = False) -> SessionFile:
        """Open an existing session file. A file on a location this process cannot write
        opens read-only (see `read_only_reason`) instead of failing. Damaged, foreign,
        truncated or too-new files raise SessionError and are left untouched; a file
        another writer holds raises SessionLockedError."""
        path = Path(path)
        if not path.is_file():
            raise SessionError(f"session file {path} does not exist")
        _check_header(path)
        note = ""
        writable = _location_writable(path)
        if read_only:
            note = "opened read-only on request"
        elif not writable:
            read_only = True
            note = f"{path} or its folder is not writable; opened read-only, edits are off"
        lock = None
        conn = None
        if not read_only:
            lock = _Lock(path)
            lock.acquire(path)
        try:
            conn = cls._connect(path, read_only, writable)
            cls._check_contents(conn, path)
            version = conn.execute("PRAGMA user_version").fetchone()[0]
            if version > schema_version():
                raise SessionError(
                    f"session file {path} has schema version {version}; this version of the "
                    f"program reads up to {schema_version()}. Use a newer version."
                )
            if version < schema_version() and read_only:
                # Read as it is: every schema from READABLE_FROM on reads the same way.
                if version < READABLE_FROM:
                    raise SessionError(
                        f"session file {path} has old schema version {version} and is open "
                        "read-only, so it cannot be upgraded; open it once for writing"
                    )
            elif version < schema_version():
                conn.execute("BEGIN IMMEDIATE")
                try:
                    cls._migrate(conn, version, path)
                    conn.execute("COMMIT")
                except BaseException:
                    conn.execute("ROLLBACK")
                    raise
            if not read_only:
                conn.execute("PRAGMA journal_mode = WAL")
                conn.execute("PRAGMA synchronous = FULL")
        except BaseException:
            if conn is not None:
                with contextlib.suppress(sqlite3.Error):
                    conn.close()
            if lock is not None:
                lock.release()
            raise
        return cls(path, conn, lock, note)

    @staticmethod
    def _connect(path: Path, read_only: bool, writable: bool) -> sqlite3.Connection:
        uri = path.resolve().as_uri()
        try:
            if not read_only:
                conn = sqlite3.connect(uri + "?mode=rw", **_CONNECT)
            else:
                conn = sqlite3.connect(uri + "?mode=ro", **_CONNECT)
                try:
                    conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
                except sqlite3.OperationalError:
                    if writable:
                        raise
                    # A WAL-mode file in a folder we cannot write has no -shm to map.
                    # Nobody can write it there either, so reading it as immutable is
                    # safe, unless a -wal holds commits the main file does not have yet.
                    conn.close()
                    wal = path.with_name(path.name + "-wal")
                    if wal.exists() and wal.stat().st_size > 0:
                        raise SessionError(
                            f"session file {path} has recent edits in {wal.name}, and its "
                            "folder is not writable, so they cannot be read; copy both files "
                            "to a writable folder"
                        ) from None
                    conn = sqlite3.connect(uri + "?mode=ro&immutable=1", **_CONNECT)
        except sqlite3.Error as exc:
            raise SessionError(f"session file {path} cannot be opened: {exc}") from exc
        return conn

    @staticmethod
    def _check_contents(conn: sqlite3.Connection, path: Path) -> None:
        try:
            result = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall()]
            app_id = conn.execute("PRAGMA application_id").fetchone()[0]
        except sqlite3.DatabaseError as exc:
            raise SessionError(f"session file {path} is damaged: {exc}") from exc
        if result != ["ok"]:
            raise SessionError(f"session file {path} is damaged: {'; '.join(result[:3])}")
        if app_id != APPLICATION_ID:
            raise SessionError(f"{path} is a SQLite file but not a Margin Reviewer session")

    @staticmethod
    def _migrate(conn: sqlite3.Connection, version: int, path: Path) -> None:
        for target in range(version + 1, schema_version() + 1):
            if target not in MIGRATIONS:
                raise SessionError(f"no way to upgrade {path} to schema version {target}")
            MIGRATIONS[target](conn)
            conn.execute(f"PRAGMA user_version = {target}")

    # ---- general -----------------------------------------------------------------------
    @property
    def read_only(self) -> bool:
        return self._lock is None

    def demote(self, reason: str) -> None:
        """From now on read-only, for ``reason``: the writer lock is dropped."""
        with self._mutex:
            if self._lock is not None:
                self._lock.release()
                self._lock = None
            self.read_only_reason = reason

    def close(self) -> None:
        """Close the file and drop the writer lock. Safe to call twice."""
        with self._mutex:
            if self._conn is not None:
                self._conn.close()
                self._conn = None  # type: ignore[assignment]
            if self._lock is not None:
                self._lock.release()

    def __enter__(self) -> SessionFile:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _writable(self, what: str) -> sqlite3.Connection:
        if self._conn is None:
            raise SessionError(f"session file {self.path} is closed")
        if self.read_only:
            raise SessionError(f"cannot {what}: session file {self.path} is open read-only")
        return self._conn

    def _query(self, sql: str, params: tuple[Any, ...] = ()) -> list[tuple[Any, ...]]:
        with self._mutex:
            if self._conn is None:
                raise SessionError(f"session file {self.path} is closed")
            try:
                return self._conn.execute(sql, params).fetchall()
            except sqlite3.Error as exc:
                raise SessionError(f"cannot read session file {self.path}: {exc}") from exc

    def _write(self, what: str, fn: Callable[[sqlite3.Connection], Any]) -> Any:
        with self._mutex:
            return self._write_locked(what, fn)

    def _write_locked(self, what: str, fn: Callable[[sqlite3.Connection], Any]) -> Any:
        conn = self._writable(what)
        try:
            conn.execute("BEGIN IMMEDIATE")
            try:
                out = fn(conn)
                conn.execute("COMMIT")
            except BaseException:
                conn.execute("ROLLBACK")
                raise
        except sqlite3.Error as exc:
            raise SessionError(f"cannot {what} in session file {self.path}: {exc}") from exc
        return out

    # ---- meta --------------------------------------------------------------------------
    @property
    def meta(self) -> dict[str, Any]:
        """All meta values, JSON-decoded (roles and settings come back as dicts)."""
        rows = self._query("SELECT key, value FROM meta")
        return {k: json.loads(v) for k, v in rows}

    def set_meta(self, key: str, value: Any) -> None:
        """Set one meta value (must be JSON-serialisable); committed at once."""
        if key not in META_KEYS:
            raise SessionError(f"unknown meta key {key!r} for {self.path}")
        text = json.dumps(value)
        self._write(
            f"set {key}",
            lambda c: c.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, text)),
        )

    # ---- events ------------------------------------------------------------------------
    def append_event(self, event: Event) -> Event:
        """Store an unsaved event (seq 0) under the next seq, in its own transaction.

        Returns the event with seq (and time, if it had none) set, only after the commit."""
        if event.seq:
            raise SessionError(f"event {event.seq} is already in the log of {self.path}")
        try:
            per_row = json.dumps(
                [event.rows, event.row_ids, event.before, event.after, event.slack, event.zone],
                separators=(",", ":"),
                default=_json_value,
            )
        except (TypeError, ValueError) as exc:
            raise SessionError(f"a {event.action} event cannot be stored: {exc}") from exc

        def insert(conn: sqlite3.Connection) -> int:
            seq = conn.execute("SELECT coalesce(max(seq), 0) + 1 FROM events").fetchone()[0]
            conn.execute(
                "INSERT INTO events VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                (
                    seq,
                    event.time,
                    event.reviewer,
                    event.action,
                    event.target,
                    event.reason,
                    event.note,
                    per_row,
                ),
            )
            return seq

        event = dataclasses.replace(event, time=event.time or utc_now())
        seq = self._write(f"record a {event.action} event", insert)
        return dataclasses.replace(event, seq=seq)

    def events(self, after_seq: int = 0) -> list[Event]:
        """Every stored event with seq > after_seq, in seq order."""
        rows = self._query(
            "SELECT seq, time, reviewer, action, target, reason, note, per_row FROM events "
            "WHERE seq > ? ORDER BY seq",
            (after_seq,),
        )
        out = []
        loads = json.loads
        for seq, time, reviewer, action, target, reason, note, per_row in rows:
            try:
                r, ids, before, after, slack, zone = loads(per_row)
                out.append(
                    Event(
                        seq=seq,
                        time=time,
                        reviewer=reviewer,
                        action=LEGACY_NAMES.get(action, action),
                        rows=tuple(r),
                        row_ids=tuple(ids),
                        before=tuple(before),
                        after=tuple(after),
                        slack=tuple(slack),
                        zone=tuple(zone),
                        reason=reason,
                        note=note,
                        target=target,
                    )
                )
            except (ValueError, TypeError) as exc:
                raise SessionError(f"event {seq} in {self.path} cannot be read: {exc}") from exc
        return read_legacy_names(out)

    def last_seq(self) -> int:
        """Seq of the newest event, 0 when the log is empty."""
        return self._query("SELECT coalesce(max(seq), 0) FROM events")[0][0]

    # ---- fits --------------------------------------------------------------------------
    def save_fit(
        self, slot: str, settings: dict[str, Any], summary: dict[str, Any], rows: Any
    ) -> int:
        """Record a fit (kept in the history for good) and make its per-row results (a
        pandas DataFrame, stored as Parquet) the content of `slot`. Returns the fit id."""
        if slot not in SLOTS:
            raise SessionError(f"fit slot {slot!r} is not one of {SLOTS}")
        buf = io.BytesIO()
        try:
            rows.to_parquet(buf, index=False)
        except Exception as exc:
            raise SessionError(f"the {slot} fit results cannot be stored: {exc}") from exc
        blob = buf.getvalue()
        settings_text, summary_text = json.dumps(settings), json.dumps(summary)

        def insert(conn: sqlite3.Connection) -> int:
            last = conn.execute("SELECT coalesce(max(seq), 0) FROM events").fetchone()[0]
            cur = conn.execute(
                "INSERT INTO fits(time, slot, last_seq, settings, summary) VALUES (?,?,?,?,?)",
                (utc_now(), slot, last, settings_text, summary_text),
            )
            conn.execute(
                "INSERT OR REPLACE INTO fit_rows VALUES (?, ?, 'parquet', ?)",
                (slot, cur.lastrowid, blob),
            )
            return int(cur.lastrowid or 0)

        return self._write(f"save the {slot} fit", insert)

    def load_fit(self, slot: str) -> FitRecord | None:
        """The fit in `slot` with its rows DataFrame, or None if none was saved."""
        if slot not in SLOTS:
            raise SessionError(f"fit slot {slot!r} is not one of {SLOTS}")
        found = self._query(
            "SELECT f.fit_id, f.time, f.last_seq, f.settings, f.summary, r.data "
            "FROM fit_rows r JOIN fits f ON f.fit_id = r.fit_id WHERE r.slot = ?",
            (slot,),
        )
        if not found:
            return None
        row = found[0]
        import pandas as pd  # deferred: opening a session to append edits needs no pandas

        fit_id, time, last, settings, summary, data = row
        try:
            rows = pd.read_parquet(io.BytesIO(data))
            settings_dict, summary_dict = json.loads(settings), json.loads(summary)
        except Exception as exc:  # Arrow, Parquet and JSON each fail in their own words
            raise SessionError(
                f"the saved {slot} fit in {self.path} is damaged ({type(exc).__name__}: "
                f"{' '.join(str(exc).split())[:200]})"
            ) from exc
        return FitRecord(
            fit_id,
            slot,
            time,
            last,
            settings_dict,
            summary_dict,
            # 0.1 files called the model's label "suggested_label".
            rows.rename(columns={"suggested_label": "model_label"}),
        )

    def fit_history(self) -> list[FitRecord]:
        """Every fit ever saved, oldest first, without per-row results."""
        rows = self._query(
            "SELECT fit_id, slot, time, last_seq, settings, summary FROM fits ORDER BY fit_id"
        )
        return [
            FitRecord(f, s, t, last, json.loads(se), json.loads(su))
            for f, s, t, last, se, su in rows
        ]

    def integrity_ok(self) -> bool:
        """Run SQLite's full integrity check now."""
        return self._query("PRAGMA integrity_check") == [("ok",)]


def _json_value(value: Any) -> Any:
    # numpy scalars that slipped into an event (labels, slack) are stored as plain values;
    # json.dumps calls this only for what it cannot encode itself.
    out = plain(value)
    if out is value:
        raise TypeError(f"{value!r} of type {type(value).__name__} cannot be stored")
    return out
