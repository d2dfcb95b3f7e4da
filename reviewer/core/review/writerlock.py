"""The single-writer lock of a session file."""

from __future__ import annotations

import os
import sys
from pathlib import Path

from reviewer.core.errors import SessionLockedError


class _Lock:
    """Exclusive, non-blocking OS lock on the session file itself; released when the
    process dies.

    The lock is on the file (its inode), not on a name: a second writer that reaches the
    same file through a symbolic link, a hard link or another relative path is refused.
    flock(2) locks are separate from the POSIX byte-range locks SQLite takes, so the two
    do not disturb each other; the descriptor is closed only after SQLite's connection.
    Windows has no flock: a sidecar file named after the resolved path is locked there.
    """

    def __init__(self, db_path: Path) -> None:
        resolved = db_path.resolve()
        self.path = (
            resolved.with_name(resolved.name + ".lock") if sys.platform == "win32" else resolved
        )
        self._fd: int | None = None

    def acquire(self, db_path: Path) -> None:
        _drop_old_sidecar(db_path)
        flags = os.O_RDWR | (os.O_CREAT if sys.platform == "win32" else 0)
        fd = os.open(self.path, flags, 0o644)
        try:
            if sys.platform == "win32":  # pragma: no cover - exercised on Windows only
                import msvcrt

                msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            else:
                import fcntl

                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            os.close(fd)
            raise SessionLockedError(
                f"session file {db_path} is open for writing elsewhere (another window or "
                "process has it); close it there or open this one read-only"
            ) from exc
        self._fd = fd

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing the descriptor drops the lock
            self._fd = None


def _drop_old_sidecar(db_path: Path) -> None:
    """Version 0.1 locked a ``.lock`` file beside the session and left it there; remove it
    unless a 0.1 process still holds it."""
    old = db_path.with_name(db_path.name + ".lock")
    if sys.platform == "win32" or not old.is_file():
        return
    import fcntl

    try:
        fd = os.open(old, os.O_RDWR)
    except OSError:
        return
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        old.unlink()
    except OSError:
        pass  # held by a running 0.1 process, or not ours to remove
    finally:
        os.close(fd)
