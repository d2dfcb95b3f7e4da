"""The session file's schema: each version's migration, and what a read-only open can read."""

from __future__ import annotations

import sqlite3
from collections.abc import Callable


def _migrate_0_to_1(conn: sqlite3.Connection) -> None:
    # One statement at a time: executescript() would commit the caller's transaction.
    script = """
        CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
        CREATE TABLE events (
            seq INTEGER PRIMARY KEY,
            time TEXT NOT NULL,
            reviewer TEXT NOT NULL,
            action TEXT NOT NULL,
            target INTEGER,
            reason TEXT NOT NULL,
            note TEXT NOT NULL,
            per_row TEXT NOT NULL
        );
        CREATE TABLE fits (
            fit_id INTEGER PRIMARY KEY,
            time TEXT NOT NULL,
            slot TEXT NOT NULL,
            last_seq INTEGER NOT NULL,
            settings TEXT NOT NULL,
            summary TEXT NOT NULL
        );
        CREATE TABLE fit_rows (
            slot TEXT PRIMARY KEY CHECK (slot IN ('baseline', 'latest')),
            fit_id INTEGER NOT NULL REFERENCES fits(fit_id),
            format TEXT NOT NULL,
            data BLOB NOT NULL
        );
    """
    for statement in script.split(";"):
        if statement.strip():
            conn.execute(statement)


def _migrate_1_to_2(conn: sqlite3.Connection) -> None:
    # A third fit slot, "edits": the edited labels fitted with the baseline's settings.
    # SQLite cannot change a CHECK constraint in place, so the table is copied.
    for statement in (
        """CREATE TABLE fit_rows_2 (
            slot TEXT PRIMARY KEY CHECK (slot IN ('baseline', 'latest', 'edits')),
            fit_id INTEGER NOT NULL REFERENCES fits(fit_id),
            format TEXT NOT NULL,
            data BLOB NOT NULL
        )""",
        "INSERT INTO fit_rows_2 (slot, fit_id, format, data) "
        "SELECT slot, fit_id, format, data FROM fit_rows",
        "DROP TABLE fit_rows",
        "ALTER TABLE fit_rows_2 RENAME TO fit_rows",
    ):
        conn.execute(statement)


MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {
    1: _migrate_0_to_1,
    2: _migrate_1_to_2,
}
READABLE_FROM = 1
"""The oldest schema this code can read without upgrading it (read-only opens need that)."""
"""Schema version -> function that brings a file from version-1 up to it (run in a transaction)."""


def schema_version() -> int:
    """The newest schema version this code writes."""
    return max(MIGRATIONS)
