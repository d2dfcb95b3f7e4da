"""Opening a review: preview a file for the roles dialog, then open or resume its session."""

from __future__ import annotations

import getpass
import os
import threading
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from reviewer._version import __version__
from reviewer.core.data.dataset import prepare_dataset
from reviewer.core.data.loading import load_table
from reviewer.core.data.roles import (
    ColumnRoles,
    guess_id_column,
    guess_label_column,
    infer_kind,
    infer_roles,
)
from reviewer.core.data.vectors import load_vectors_file
from reviewer.core.errors import InputError, SessionError, SourceChangedError
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.review.sessionfile import SessionFile
from reviewer.core.values import FitSettings

if TYPE_CHECKING:
    from reviewer.core.review.session import ReviewSession

SESSION_SUFFIX = ".review.sqlite"
APP_NAME = "margin-reviewer"


def default_reviewer() -> str:
    try:
        return getpass.getuser() or "reviewer"
    except Exception:  # no login name in some containers
        return "reviewer"


def default_session_path(data_path: Path, sha256: str) -> Path:
    """Beside the data file as ``<name>.review.sqlite``; the user data folder when that
    folder is not writable."""
    data_path = Path(data_path).resolve()
    beside = data_path.with_name(data_path.name + SESSION_SUFFIX)
    if beside.exists() or os.access(data_path.parent, os.W_OK):
        return beside
    from platformdirs import user_data_dir

    folder = Path(user_data_dir(APP_NAME, appauthor=False)) / "sessions"
    folder.mkdir(parents=True, exist_ok=True)
    return folder / f"{data_path.stem}-{sha256[:12]}{SESSION_SUFFIX}"


@dataclass
class TablePreview:
    """What the column-roles dialog shows before a session is opened."""

    source: Any
    head: pd.DataFrame
    columns: list[str]
    guessed_label: str | None
    guessed_id: str | None
    kinds: dict[str, tuple[str, str]]  # column -> (kind, reason)
    remembered: dict[str, Any] | None  # roles saved in an existing session file


PREVIEW_SAMPLE_ROWS = 5_000
"""The preview guesses roles from this many leading rows, not the whole file."""


def preview_table(
    data_path: str | os.PathLike[str],
    *,
    rows: int = 20,
    sample: int = PREVIEW_SAMPLE_ROWS,
    sheet: str | None = None,
    progress: ProgressFn | None = None,
) -> TablePreview:
    """Read the first ``sample`` rows of a file and guess its roles, for the column-roles
    dialog (which shows the first ``rows``). The fingerprint is of the whole file."""
    loaded = load_table(data_path, max_rows=max(rows, sample), sheet=sheet, progress=progress)
    frame = loaded.frame
    label = guess_label_column(frame)
    ident = guess_id_column(frame, label)
    kinds = {c: infer_kind(frame[c]) for c in frame.columns}
    remembered = None
    path = default_session_path(loaded.source.path, loaded.source.sha256)
    if path.exists():
        try:
            with SessionFile.open(path, read_only=True) as f:
                meta = f.meta
            remembered = {
                "label": meta.get("label_column"),
                "id": meta.get("id_column"),
                "roles": meta.get("roles"),
                "sheet": meta.get("sheet"),
            }
        except SessionError:
            remembered = None
    return TablePreview(
        loaded.source, frame.head(rows), list(frame.columns), label, ident, kinds, remembered
    )


def open_session(
    cls: type[ReviewSession],
    data_path: str | os.PathLike[str],
    *,
    label: str | None = None,
    id_column: str | None = None,
    session_path: str | os.PathLike[str] | None = None,
    overrides: Mapping[str, str] | None = None,
    reviewer: str | None = None,
    read_only: bool = False,
    reattach: bool = False,
    sheet: str | None = None,
    vectors: str | os.PathLike[str] | None = None,
    progress: ProgressFn | None = None,
    cancel: threading.Event | None = None,
) -> ReviewSession:
    """Open (or start) the review of ``data_path`` (of its ``sheet``, for a workbook; a
    session remembers its sheet, and the path and SHA-256 of its ``vectors`` file).

    An existing session file resumes where the reviewer left off, with its remembered
    roles. If the data file changed since the session began, SourceChangedError is
    raised unless ``read_only`` (look only) or ``reattach`` (match rows by the id
    column; rows that no longer exist are reported in ``warnings``).
    """
    report = Reporter(progress, cancel)
    loaded = load_table(data_path, sheet=sheet, progress=report.slice(0.0, 0.6), cancel=cancel)
    src = loaded.source
    path = Path(session_path) if session_path else default_session_path(src.path, src.sha256)
    warnings: list[str] = []
    vectors_meta: dict[str, str] | None = None
    if path.exists():
        file = SessionFile.open(path, read_only=read_only)
        try:
            meta = file.meta
            remembered_sheet = meta.get("sheet")
            if remembered_sheet and remembered_sheet != src.sheet:
                if sheet is not None:
                    raise SessionError(
                        f"session {path} reviews sheet {remembered_sheet!r}, not {sheet!r}; "
                        "choose another session file to review another sheet"
                    )
                loaded = load_table(
                    data_path, sheet=remembered_sheet, progress=report.slice(0.0, 0.6)
                )
                src = loaded.source
            label_col = meta.get("label_column")
            id_col = meta.get("id_column")
            if not label_col:
                raise SessionError(f"session {path} names no label column; it is damaged")
            if label and label != label_col:
                raise SessionError(
                    f"session {path} reviews label column {label_col!r}, not {label!r}; "
                    "choose another session file to review a different column"
                )
            roles = ColumnRoles.from_dict(meta["roles"]) if meta.get("roles") else None
            if roles is None or any(
                c not in loaded.frame.columns for c in [roles.label, *roles.features]
            ):
                roles = infer_roles(
                    loaded.frame,
                    label_col,
                    id_col,
                    overrides,
                    require_features=not meta.get("vectors"),
                )
            settings = FitSettings.from_dict(meta.get("settings") or {})
            changed = meta.get("source_sha256") != src.sha256
            if changed and not (read_only or reattach):
                raise SourceChangedError(
                    f"{src.path} changed since session {path} began (SHA-256 differs). "
                    "Open it read-only to look, or re-attach by the id column"
                    + (f" {id_col!r}" if id_col else " (this table has none, so only read-only)")
                )
            if changed and reattach:
                if not id_col:
                    raise SourceChangedError(
                        f"{src.path} changed and session {path} has no id column "
                        "to re-attach by; "
                        "open it read-only instead"
                    )
                if file.read_only:
                    raise SessionError(f"cannot re-attach: {file.read_only_reason}")
                file.set_meta("source_sha256", src.sha256)
                file.set_meta("source_path", str(src.path))
            if changed and read_only:
                warnings.append(f"{src.path} changed since the session began; opened read-only")
            if file.read_only_reason:
                warnings.append(file.read_only_reason)
            vectors_meta = _resumed_vectors(meta.get("vectors"), vectors, path)
            if vectors_meta != meta.get("vectors") and not file.read_only:
                file.set_meta("vectors", vectors_meta)
        except BaseException:
            file.close()
            raise
    else:
        if read_only:
            raise SessionError(f"no session file at {path} to open read-only")
        if label is None:
            raise InputError(f"{src.path}: choose the label column (--label)")
        roles = infer_roles(
            loaded.frame, label, id_column, overrides, require_features=vectors is None
        )
        settings = FitSettings()
        if vectors is not None:
            vectors_meta = _vectors_meta(vectors, len(loaded.frame))
        file = SessionFile.create(
            path,
            {
                "source_path": str(src.path),
                "source_sha256": src.sha256,
                "label_column": roles.label,
                "id_column": roles.id,
                "roles": roles.to_dict(),
                "settings": settings.to_dict(),
                "reviewer": reviewer or default_reviewer(),
                "app_version": __version__,
                "sheet": src.sheet,
                "vectors": vectors_meta,
            },
        )
    try:
        report(0.65, "building features")
        dataset = prepare_dataset(
            loaded, roles, vectors=vectors_meta["path"] if vectors_meta else None
        )
        if vectors_meta and dataset.vectors_sha256 != vectors_meta["sha256"]:
            raise SourceChangedError(
                f"vectors file {vectors_meta['path']} changed while the session was opening"
            )
        warnings.extend(dataset.notes)
        session = cls(dataset, file, reviewer or default_reviewer(), settings, warnings)
    except BaseException:
        file.close()
        raise
    report(1.0, "session open")
    return session


def _vectors_meta(vectors: str | os.PathLike[str], n_rows: int) -> dict[str, str]:
    """What the session file remembers of a vectors file: its path and SHA-256 (the file
    is checked now, so a bad one is refused before a session file is written)."""
    _, digest = load_vectors_file(vectors, n_rows)
    return {"path": str(Path(vectors).expanduser().resolve()), "sha256": digest}


def _resumed_vectors(
    remembered: Mapping[str, str] | None, given: str | os.PathLike[str] | None, session: Path
) -> dict[str, str] | None:
    """The vectors file a resumed session uses: the one given, else the one remembered,
    which must still be there with the same SHA-256."""
    from reviewer.core.data.loading import sha256_of

    if given is not None:
        path = Path(given).expanduser().resolve()
        if not remembered:
            raise SessionError(
                f"session {session} began without a vectors file; a session keeps its "
                f"features: start a new session file (--session) to use {path}"
            )
        if path.exists() and sha256_of(path) != remembered.get("sha256"):
            raise SourceChangedError(
                f"vectors file {path} differs from the one session {session} began with "
                f"({remembered.get('path')}, SHA-256 {str(remembered.get('sha256'))[:12]}...); "
                "a session keeps its features: start a new session file for new vectors"
            )
        return {"path": str(path), "sha256": str(remembered["sha256"])}
    if not remembered:
        return None
    path = Path(remembered["path"])
    if not path.exists():
        raise SessionError(
            f"session {session} uses the vectors file {path}, which is not there any more; "
            "put it back, or give its new place with --vectors"
        )
    if sha256_of(path) != remembered.get("sha256"):
        raise SourceChangedError(
            f"vectors file {path} changed since session {session} began (SHA-256 differs); "
            "a session keeps its features: restore the file or start a new session file"
        )
    return dict(remembered)
