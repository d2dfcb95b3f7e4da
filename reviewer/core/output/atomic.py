"""Write a file all at once or not at all.

Bytes go to a temporary file beside the target (same folder, so the final rename never
crosses file systems), are flushed and fsync'ed, and then the temporary file is moved
into place. On any failure the temporary file is removed and ExportError names the
target and the cause; the target is then either absent or exactly as it was before. A
temporary is locked while it is written, so one that a killed export left behind can be
told from one a running export is writing, and is removed by the next export.

An existing target is refused unless ``overwrite=True``: a cleaned table or an audit log
is easy to lose by writing over yesterday's, so replacing one must be asked for. A
target that is the source data file (the same path, a symbolic link to it, or a hard
link) is always refused, with or without ``overwrite``.
"""

from __future__ import annotations

import errno
import io
import os
import re
import secrets
import stat
import time
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import Any, BinaryIO

from reviewer.core.errors import ExportError

try:
    import fcntl
except ImportError:  # not on Windows
    fcntl = None  # type: ignore[assignment]

#: How to ask for a replacement, said in the words of the command line and of Python.
OVERWRITE_HINT = "pass --overwrite (overwrite=True in Python) to replace it"

_CAUSES = {
    errno.ENOSPC: "disk full",
    errno.EDQUOT: "disk quota exceeded",
    errno.EROFS: "read-only file system",
    errno.EACCES: "permission denied",
    errno.EPERM: "permission denied",
    errno.ENOENT: "folder does not exist",
    errno.ENOTDIR: "a part of the path is not a folder",
    errno.EISDIR: "the target is a folder",
    errno.ENAMETOOLONG: "file name too long",
    errno.EIO: "input/output error",
}


def describe_os_error(exc: BaseException) -> str:
    """A short plain cause for an OS error, e.g. 'disk full (No space left on device)'."""
    if isinstance(exc, OSError) and exc.errno in _CAUSES:
        detail = exc.strerror or os.strerror(exc.errno)
        return f"{_CAUSES[exc.errno]} ({detail})"
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror
    return f"{type(exc).__name__}: {exc}" if str(exc) else type(exc).__name__


class _FdStream(io.RawIOBase):
    """A raw binary stream over a file descriptor whose writes go through ``os.write``.

    Writers such as pyarrow and openpyxl get an ordinary file object, and every byte still
    passes through one function, so a failure (ENOSPC, EIO) surfaces in one place.
    """

    def __init__(self, fd: int) -> None:
        self._fd = fd

    def writable(self) -> bool:
        return True

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def write(self, data: Any) -> int:
        if self._fd < 0:
            return len(data)  # see _ignore_after_release
        view = memoryview(data).cast("B")
        done = 0
        while done < len(view):
            done += os.write(self._fd, view[done:])
        return done

    def readinto(self, buffer: Any) -> int:
        chunk = os.read(self._fd, len(buffer))
        buffer[: len(chunk)] = chunk
        return len(chunk)

    def seek(self, offset: int, whence: int = io.SEEK_SET) -> int:
        if self._fd < 0:
            return 0
        return os.lseek(self._fd, offset, whence)

    def tell(self) -> int:
        if self._fd < 0:
            return 0
        return os.lseek(self._fd, 0, io.SEEK_CUR)

    def truncate(self, size: int | None = None) -> int:
        if self._fd < 0:
            return 0
        size = self.tell() if size is None else size
        os.ftruncate(self._fd, size)
        return size

    def fileno(self) -> int:
        return self._fd

    def close(self) -> None:
        # Writers close the stream they were given (pandas does); the descriptor must stay
        # open for fsync, and release() below ends its use.
        pass

    def release(self) -> None:
        # atomic_write owns and closes the descriptor. A writer that failed half way may
        # still hold this stream and flush it when collected (zipfile does); those late
        # calls are dropped so they neither land in a reused descriptor nor print errors.
        # The outcome is already decided by then: the temporary file is gone.
        self._fd = -1


def same_file(a: Path, b: Path) -> bool:
    """True when two paths name the same file (by resolved path, or inode when both exist)."""
    try:
        if a.resolve() == b.resolve():
            return True
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def _default_mode() -> int:
    # mkstemp creates 0600; a finished export should get the usual mode a new file gets.
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _fsync_folder(folder: Path) -> None:
    # Makes the rename itself durable on POSIX; not available (nor needed) everywhere.
    if not hasattr(os, "O_DIRECTORY"):
        return
    try:
        fd = os.open(folder, os.O_RDONLY | os.O_DIRECTORY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def check_target(
    target: str | os.PathLike[str], *, overwrite: bool = False, protect: Iterable[Path] = ()
) -> Path:
    """Refuse a target that is a protected (source) file, a folder, or exists without overwrite.

    Returns the target as an absolute Path. Called before any work starts, so a long export
    fails early; atomic_write checks again at the end.
    """
    path = Path(os.path.abspath(os.fspath(target)))
    for source in protect:
        if same_file(path, Path(source)):
            raise ExportError(
                f"Refusing to export to {path}: it is the source data file {source}; "
                "choose another file name"
            )
    if path.is_dir():
        raise ExportError(f"Cannot write {path}: the target is a folder")
    if path.exists() and not overwrite:
        raise ExportError(
            f"Refusing to export to {path}: the file already exists; {OVERWRITE_HINT}"
        )
    return path


def atomic_write(
    target: str | os.PathLike[str],
    write: Callable[[BinaryIO], object],
    *,
    overwrite: bool = False,
    protect: Iterable[Path] = (),
) -> Path:
    """Call ``write(stream)`` on a temporary file beside ``target``, then move it into place.

    ``protect`` lists files that must never be written (the source data file). Returns the
    absolute target path. Raises ExportError naming the target and the cause; on failure
    neither the temporary file nor a new target is left behind. Temporaries that earlier,
    killed exports left in the same folder are removed first (remove_stale_temporaries).
    """
    protect = tuple(Path(p) for p in protect)
    path = check_target(target, overwrite=overwrite, protect=protect)
    folder = path.parent
    remove_stale_temporaries(folder)
    try:
        fd, tmp = _create_temporary(path)
    except OSError as exc:
        raise ExportError(f"Cannot write {path}: {describe_os_error(exc)}") from exc
    placed = False
    try:
        # Unbuffered on purpose: nothing is left in a buffer to be flushed (and fail) later.
        stream = _FdStream(fd)
        try:
            write(stream)  # type: ignore[arg-type]
            os.fsync(fd)
            if path.exists():
                os.chmod(tmp, path.stat().st_mode & 0o7777)
            else:
                os.chmod(tmp, _default_mode())
        finally:
            stream.release()
        if fcntl is None:  # no advisory lock to keep, and an open file cannot be renamed
            os.close(fd)
            fd = -1
        # The descriptor, and so the lock that marks the temporary as in use, is held until
        # the file is in place: a concurrent export never takes it for a leftover.
        _place(tmp, path, overwrite=overwrite, protect=protect)
        placed = True
        _fsync_folder(folder)
    except ExportError:
        raise
    except Exception as exc:
        raise ExportError(f"Cannot write {path}: {describe_os_error(exc)}") from exc
    finally:
        if not placed:
            try:
                tmp.unlink()
            except OSError:
                pass  # gone already, or the original error is the one worth reporting
        if fd >= 0:
            os.close(fd)
    return path


# -- temporaries -----------------------------------------------------------------------------
#
# A temporary is named ".<target name>.mr-<pid>-<token>.partial" and holds an exclusive
# advisory lock (flock) from creation until it is renamed into place or removed. The lock
# goes with the process: a killed export leaves an unlocked temporary, which the next export
# into that folder removes. A locked one belongs to an export still running and is left.

_TEMPORARY = re.compile(r"\.(?P<target>.+)\.mr-(?P<pid>\d+)-(?P<token>[0-9a-f]{12})\.partial")
# Earlier versions named temporaries ".<target name>.<8 characters>.partial" and did not
# lock them; one older than this many seconds is a leftover (a live export writes on).
_LEGACY = re.compile(r"\.(?P<target>.+)\.[a-z0-9_]{8}\.partial")
LEGACY_STALE_SECONDS = 3600.0


def temporary_name(path: Path) -> str:
    """A fresh temporary file name for ``path`` (same folder), recognisable as ours."""
    return f".{path.name}.mr-{os.getpid()}-{secrets.token_hex(6)}.partial"


def _lock(fd: int) -> str:
    """Take the exclusive lock without waiting: "locked", "busy" (held) or "unsupported"."""
    if fcntl is None:
        return "unsupported"
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return "busy"
    except OSError:  # a file system without advisory locks
        return "unsupported"
    return "locked"


def _create_temporary(path: Path) -> tuple[int, Path]:
    flags = os.O_RDWR | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0)
    flags |= getattr(os, "O_BINARY", 0) | getattr(os, "O_NOFOLLOW", 0)
    for _ in range(100):
        tmp = path.parent / temporary_name(path)
        try:
            fd = os.open(tmp, flags, 0o600)
        except FileExistsError:
            continue
        # Between creating and locking, a cleaner may have taken the lock and removed the
        # file; only a file we hold locked under its name is ours to write.
        try:
            if _lock(fd) != "busy" and os.stat(tmp).st_ino == os.fstat(fd).st_ino:
                return fd, tmp
        except FileNotFoundError:
            pass
        except BaseException:
            os.close(fd)
            raise
        os.close(fd)
    raise FileExistsError(errno.EEXIST, "no free temporary file name", str(path.parent))


def remove_stale_temporaries(folder: str | os.PathLike[str]) -> list[Path]:
    """Remove temporaries that killed exports left in ``folder``; return what was removed.

    Only files named as this module names them are touched, and only when no running
    export holds them (their lock is free) or, for an earlier version's unlocked names,
    when they have not been written to for LEGACY_STALE_SECONDS. Errors are ignored: a
    leftover that cannot be removed does no harm to the export under way.
    """
    removed: list[Path] = []
    try:
        names = os.listdir(folder)
    except OSError:
        return removed
    now = time.time()
    for name in names:
        if not name.endswith(".partial"):
            continue
        path = Path(folder) / name
        try:
            if _TEMPORARY.fullmatch(name):
                if _remove_if_unlocked(path):
                    removed.append(path)
            elif _LEGACY.fullmatch(name):
                info = path.lstat()
                if stat.S_ISREG(info.st_mode) and now - info.st_mtime > LEGACY_STALE_SECONDS:
                    path.unlink()
                    removed.append(path)
        except OSError:
            continue
    return removed


def _remove_if_unlocked(path: Path) -> bool:
    flags = os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0)
    if fcntl is None:
        # Without advisory locks, a temporary whose process is gone is a leftover.
        match = _TEMPORARY.fullmatch(path.name)
        if match is None or _process_alive(int(match["pid"])):
            return False
        path.unlink()
        return True
    fd = os.open(path, flags)
    try:
        if _lock(fd) != "locked":
            return False  # an export is writing it right now, or we cannot tell
        if os.lstat(path).st_ino != os.fstat(fd).st_ino:
            return False  # replaced meanwhile by a new temporary of the same name
        path.unlink()
        return True
    finally:
        os.close(fd)


def _process_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True  # exists, owned by someone else
    return True


def _place(tmp: Path, path: Path, *, overwrite: bool, protect: tuple[Path, ...]) -> None:
    # Check again: the source or a new file may have appeared at the target meanwhile.
    check_target(path, overwrite=overwrite, protect=protect)
    if overwrite:
        os.replace(tmp, path)
        return
    # A hard link fails if the name is taken, so "never overwrite" holds even in a race.
    try:
        os.link(tmp, path)
    except FileExistsError as exc:
        raise ExportError(
            f"Refusing to export to {path}: the file already exists; {OVERWRITE_HINT}"
        ) from exc
    except (OSError, NotImplementedError):
        # Some file systems (FAT, some network shares) have no hard links.
        os.replace(tmp, path)
        return
    tmp.unlink()


def atomic_write_bytes(
    target: str | os.PathLike[str],
    data: bytes,
    *,
    overwrite: bool = False,
    protect: Iterable[Path] = (),
) -> Path:
    """Write ``data`` to ``target`` atomically; see atomic_write."""
    return atomic_write(target, lambda s: s.write(data), overwrite=overwrite, protect=protect)


def atomic_write_text(
    target: str | os.PathLike[str],
    text: str,
    *,
    encoding: str = "utf-8",
    overwrite: bool = False,
    protect: Iterable[Path] = (),
) -> Path:
    """Encode ``text`` and write it to ``target`` atomically; see atomic_write."""
    try:
        data = text.encode(encoding)
    except UnicodeEncodeError as exc:
        raise ExportError(f"Cannot write {target}: text not encodable as {encoding}") from exc
    return atomic_write_bytes(target, data, overwrite=overwrite, protect=protect)
