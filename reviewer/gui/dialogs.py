"""The window's dialogs: export, the data file changed, help, and the recent-files list."""

from __future__ import annotations

import functools
from collections.abc import Callable
from pathlib import Path

from PySide6.QtCore import QSettings
from PySide6.QtWidgets import (
    QCheckBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QLineEdit,
    QMenu,
    QMessageBox,
    QPushButton,
    QStyle,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from reviewer.gui.actions import help_rows
from reviewer.gui.help_text import help_html

RECENT_KEY = "recent_files"
MAX_RECENT = 8


def app_settings() -> QSettings:
    """Per-user settings (recent files, window layout) in an INI file tests can redirect."""
    return QSettings(
        QSettings.Format.IniFormat, QSettings.Scope.UserScope, "margin-reviewer", "window"
    )


class ExportDialog(QDialog):
    """Cleaned file, optional audit log and report, keep-excluded; defaults in ``folder``."""

    def __init__(self, source: Path, folder: Path, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Export")
        src = Path(source)
        form = QFormLayout(self)
        self.out = QLineEdit(str(folder / f"{src.stem}.cleaned{src.suffix}"))
        self.audit = QLineEdit(str(folder / f"{src.stem}.audit.csv"))
        self.report = QLineEdit("")
        self.report.setPlaceholderText(f"optional, e.g. {folder / (src.stem + '.report.html')}")
        self.keep = QCheckBox("Keep excluded rows (marked) instead of dropping them")
        self.browse_buttons: list[QPushButton] = []
        form.addRow("Cleaned file", self._with_browse(self.out))
        form.addRow("Audit log", self._with_browse(self.audit))
        form.addRow("Report (HTML)", self._with_browse(self.report))
        form.addRow("", self.keep)
        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Export")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)
        self.buttons = buttons
        self.resize(640, 200)

    def _with_browse(self, edit: QLineEdit) -> QWidget:
        w = QWidget()
        lay = QHBoxLayout(w)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(edit, 1)
        b = QPushButton("Browse…")
        b.setIcon(self.style().standardIcon(QStyle.StandardPixmap.SP_DirOpenIcon))
        b.setToolTip("Choose where to write this file")
        b.clicked.connect(lambda: self._browse(edit))
        self.browse_buttons.append(b)
        lay.addWidget(b)
        return w

    def _browse(self, edit: QLineEdit) -> None:
        start = edit.text() or edit.placeholderText().removeprefix("optional, e.g. ")
        path, _ = QFileDialog.getSaveFileName(self, "Save as", start)
        if path:
            edit.setText(path)

    def values(self) -> tuple[str, str | None, str | None, bool]:
        return (
            self.out.text().strip(),
            self.audit.text().strip() or None,
            self.report.text().strip() or None,
            self.keep.isChecked(),
        )


def ask_source_changed(parent: QWidget, message: str) -> str | None:
    """ "read_only", "reattach" or None (cancel)."""
    box = QMessageBox(parent)
    box.setIcon(QMessageBox.Icon.Warning)
    box.setWindowTitle("The data file changed")
    box.setText(message)
    ro = box.addButton("Open read-only", QMessageBox.ButtonRole.AcceptRole)
    re = box.addButton("Re-attach by id", QMessageBox.ButtonRole.ActionRole)
    box.addButton(QMessageBox.StandardButton.Cancel)
    box.exec()
    if box.clickedButton() is ro:
        return "read_only"
    if box.clickedButton() is re:
        return "reattach"
    return None


class HelpDialog(QDialog):
    """Keys (from the action table) and the caution."""

    def __init__(self, score: str, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Keys and caution")
        self.resize(620, 560)
        lay = QVBoxLayout(self)
        self.text = QTextBrowser()
        self.text.setObjectName("help_text")
        self.text.setHtml(help_html(help_rows(), score))
        lay.addWidget(self.text)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)


def recent_files() -> list[str]:
    value = app_settings().value(RECENT_KEY, [])
    items: list[object] = [value] if isinstance(value, str) else list(value or [])  # type: ignore[call-overload]
    return [str(v) for v in items if Path(str(v)).exists()]


def remember_recent(path: Path) -> None:
    p = str(Path(path).resolve())
    files = [p, *[f for f in recent_files() if f != p]][:MAX_RECENT]
    app_settings().setValue(RECENT_KEY, files)


def fill_recent_menu(menu: QMenu, open_path: Callable[[Path], object]) -> None:
    """Fill ``menu`` with the recent files; choosing one calls ``open_path(Path)``."""
    menu.clear()
    files = recent_files()
    if not files:
        act = menu.addAction("(none yet)")
        if act is not None:
            act.setEnabled(False)
    for f in files:
        menu.addAction(f, functools.partial(open_path, Path(f)))
