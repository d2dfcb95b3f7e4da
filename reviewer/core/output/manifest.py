"""The export manifest: which files one export wrote, their SHA-256, the edits they reflect.

It is written last, after the cleaned table, the audit log and the report are in place, so
a set whose export was killed half way has no manifest of its own (or an older one whose
fingerprints no longer match), and ``verify_manifest`` says which file is missing or
different. Its name is the cleaned file's name plus ``.manifest.json``.
"""

from __future__ import annotations

import datetime as dt
import json
import os
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from reviewer.core.data.loading import sha256_of
from reviewer.core.errors import ExportError
from reviewer.core.output.atomic import atomic_write_bytes
from reviewer.core.output.report import app_version
from reviewer.core.plain import plain

__all__ = [
    "MANIFEST_KIND",
    "check_manifest_target",
    "manifest_path_for",
    "verify_manifest",
    "write_manifest",
]

MANIFEST_KIND = "margin-reviewer export manifest"
MANIFEST_VERSION = 1


def manifest_path_for(cleaned: str | os.PathLike[str]) -> Path:
    """Where the manifest of an export whose cleaned table is ``cleaned`` goes."""
    path = Path(os.path.abspath(os.fspath(cleaned)))
    return path.with_name(path.name + ".manifest.json")


def check_manifest_target(manifest_path: str | os.PathLike[str]) -> Path:
    """Refuse a manifest place taken by a file that is not a manifest; return it absolute."""
    target = Path(os.path.abspath(os.fspath(manifest_path)))
    if target.exists() and _read(target) is None:
        raise ExportError(
            f"Refusing to write the export manifest {target}: a file that is not a manifest "
            "has that name; move it away"
        )
    return target


def write_manifest(
    files: Mapping[str, str | os.PathLike[str]],
    *,
    event_seq: int | None,
    source_path: str | os.PathLike[str],
    source_sha256: str,
    session_path: str | os.PathLike[str] | None = None,
    manifest_path: str | os.PathLike[str] | None = None,
    protect: Iterable[str | os.PathLike[str]] = (),
) -> Path:
    """Write the manifest of one export; ``files`` maps a role (cleaned, audit, report) to a path.

    The default location is manifest_path_for(files["cleaned"]). A manifest written by an
    earlier export is replaced; any other file at that place is refused, so a file of the
    user's that happens to carry the name is never lost.
    """
    if not files:
        raise ExportError("Cannot write a manifest of no files")
    paths = {role: Path(os.path.abspath(os.fspath(p))) for role, p in files.items()}
    if manifest_path is None:
        first = paths.get("cleaned", next(iter(paths.values())))
        manifest_path = manifest_path_for(first)
    target = check_manifest_target(manifest_path)
    entries = []
    for role, path in paths.items():
        try:
            size, digest = path.stat().st_size, sha256_of(path)
        except OSError as exc:
            raise ExportError(f"Cannot write the manifest: {path} cannot be read ({exc})") from exc
        entries.append(
            {
                "role": role,
                "name": os.path.relpath(path, target.parent),
                "path": str(path),
                "bytes": size,
                "sha256": digest,
            }
        )
    document = {
        "kind": MANIFEST_KIND,
        "version": MANIFEST_VERSION,
        "written_at": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"),
        "app_version": app_version(),
        "source": {"path": str(source_path), "sha256": source_sha256},
        "session": None if session_path is None else str(session_path),
        "event_seq": event_seq,
        "files": entries,
    }
    data = json.dumps(plain(document), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    return atomic_write_bytes(
        target, data.encode("utf-8"), overwrite=True, protect=tuple(Path(p) for p in protect)
    )


def _read(path: Path) -> dict[str, Any] | None:
    try:
        document = json.loads(path.read_text("utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError):
        return None
    if not isinstance(document, dict) or document.get("kind") != MANIFEST_KIND:
        return None
    return document


def verify_manifest(manifest_path: str | os.PathLike[str]) -> list[str]:
    """What does not match the manifest, one sentence per problem; empty when the set is whole.

    A file is looked for by its name relative to the manifest first (a set moved together
    still checks), then at the absolute path recorded.
    """
    path = Path(manifest_path)
    document = _read(path)
    if document is None:
        return [f"{path} is missing or is not an export manifest"]
    problems = []
    for entry in document.get("files", []):
        role = entry.get("role", "file")
        candidates = [path.parent / entry.get("name", ""), Path(entry.get("path", ""))]
        found = next((c for c in candidates if c.is_file()), None)
        if found is None:
            problems.append(f"the {role} file {entry.get('name')} is missing")
            continue
        if found.stat().st_size != entry.get("bytes") or sha256_of(found) != entry.get("sha256"):
            problems.append(
                f"the {role} file {found} differs from the one this export wrote "
                f"(the manifest reflects event {document.get('event_seq')})"
            )
    return problems
