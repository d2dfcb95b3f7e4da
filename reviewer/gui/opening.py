"""Opening a data file from the window: the file dialog, the column-roles dialog, loading on a
worker, and the question when the data file changed since its session began."""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from PySide6.QtWidgets import QDialog, QFileDialog, QInputDialog, QWidget

from reviewer.core.door import ReviewSession
from reviewer.core.errors import ReviewerError, SourceChangedError
from reviewer.gui import dialogs
from reviewer.gui.roles_dialog import RolesDialog
from reviewer.gui.tasks import TaskStrip, open_on_worker, preview_on_worker

TABLE_FILTER = "Tables (*.csv *.tsv *.txt *.parquet *.xlsx *.xls);;All files (*)"
Roles = tuple[str, str | None, dict[str, str], str | None, Path | None]
"""(label column, id column, kind overrides, workbook sheet, vectors file)."""


class Opener:
    """Opens sessions for ``parent``: progress in ``strip``, ``busy`` widgets (menus, toolbar)
    off meanwhile so nothing else starts, failures to ``report``."""

    def __init__(
        self,
        parent: QWidget,
        strip: TaskStrip,
        report: Callable[[str], None],
        busy: Sequence[QWidget],
    ) -> None:
        self.parent = parent
        self.strip = strip
        self.report = report
        self.busy = list(busy)

    def _set_busy(self, on: bool) -> None:
        for w in self.busy:
            w.setEnabled(not on)

    def _run(self, fn: Callable[[], Any]) -> Any:
        self._set_busy(True)
        try:
            return fn()
        finally:
            self._set_busy(False)

    def start_folder(self, current: ReviewSession | None) -> str:
        """The open file's folder; else the most recent file's; else the current folder."""
        if current is not None:
            return str(current.loaded.source.path.parent)
        recent = dialogs.recent_files()
        return str(Path(recent[0]).parent) if recent else ""

    def choose_file(self, current: ReviewSession | None) -> Path | None:
        path, _ = QFileDialog.getOpenFileName(
            self.parent, "Open a labelled table", self.start_folder(current), TABLE_FILTER
        )
        return Path(path) if path else None

    def ask_roles(self, path: Path) -> Roles | None:
        """The column-roles dialog over a preview read on a worker; None when cancelled.
        A workbook with several sheets asks for the sheet first."""
        try:
            preview = self._run(lambda: preview_on_worker(self.strip, path))
            sheets = list(preview.source.sheets)
            sheet = None
            if len(sheets) > 1:
                remembered = (preview.remembered or {}).get("sheet")
                first = sheets.index(remembered) if remembered in sheets else 0
                sheet, ok = QInputDialog.getItem(
                    self.parent, "Sheet", f"{path.name}: the sheet to review", sheets, first, False
                )
                if not ok:
                    return None
                if sheet != preview.source.sheet:
                    chosen = sheet
                    preview = self._run(lambda: preview_on_worker(self.strip, path, chosen))
        except ReviewerError as exc:
            self.report(str(exc))
            return None
        dlg = RolesDialog(preview, self.parent)
        if dlg.exec() != QDialog.DialogCode.Accepted:
            return None
        return (*dlg.choices(), sheet, dlg.vectors())

    def open(
        self,
        path: Path,
        label: str | None,
        id_column: str | None,
        session_path: str | os.PathLike[str] | None = None,
        overrides: dict[str, str] | None = None,
        sheet: str | None = None,
        vectors: Path | None = None,
    ) -> ReviewSession | None:
        """The opened session, or None (reported, or the reviewer cancelled)."""
        kwargs: dict[str, Any] = dict(
            label=label,
            id_column=id_column,
            session_path=session_path,
            overrides=overrides,
            sheet=sheet,
        )
        if vectors is not None:
            # Passed only when chosen: a vectors file is an optional extra of the open.
            kwargs["vectors"] = Path(vectors)
        try:
            return self._run(lambda: open_on_worker(self.strip, path, **kwargs))
        except SourceChangedError as exc:
            choice = dialogs.ask_source_changed(self.parent, str(exc))
            if choice is None:
                return None
            try:
                return self._run(
                    lambda: open_on_worker(self.strip, path, **kwargs, **{choice: True})
                )
            except ReviewerError as exc2:
                self.report(str(exc2))
                return None
        except ReviewerError as exc:
            self.report(str(exc))
            return None
