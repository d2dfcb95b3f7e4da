"""Icons and the style sheet from the repository's assets/ folder."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtGui import QIcon
from PySide6.QtWidgets import QApplication, QStyle

ASSETS_DIR = Path(__file__).resolve().parents[2] / "assets"

# Standard icons used when an SVG is missing (a packaging slip should not blank the toolbar).
_FALLBACK: dict[str, QStyle.StandardPixmap] = {
    "open": QStyle.StandardPixmap.SP_DialogOpenButton,
    "fit": QStyle.StandardPixmap.SP_MediaPlay,
    "refit": QStyle.StandardPixmap.SP_BrowserReload,
    "confirm": QStyle.StandardPixmap.SP_DialogApplyButton,
    "relabel": QStyle.StandardPixmap.SP_FileDialogDetailedView,
    "take_model": QStyle.StandardPixmap.SP_ArrowRight,
    "exclude": QStyle.StandardPixmap.SP_DialogCancelButton,
    "restore": QStyle.StandardPixmap.SP_DialogResetButton,
    "undo": QStyle.StandardPixmap.SP_ArrowBack,
    "redo": QStyle.StandardPixmap.SP_ArrowForward,
    "export": QStyle.StandardPixmap.SP_DialogSaveButton,
}

ICON_NAMES: tuple[str, ...] = tuple(_FALLBACK)


def asset_path(name: str) -> Path:
    """Path of a file under assets/ (it may not exist)."""
    return ASSETS_DIR / name


def icon(name: str) -> QIcon:
    """Icon ``assets/icons/<name>.svg``; a standard style icon if the file is missing.

    Needs a QApplication for the fallback; returns an empty QIcon if there is none.
    """
    path = asset_path(f"icons/{name}.svg")
    if path.is_file():
        return QIcon(str(path))
    app = QApplication.instance()
    if isinstance(app, QApplication):
        return app.style().standardIcon(_FALLBACK.get(name, QStyle.StandardPixmap.SP_FileIcon))
    return QIcon()


def load_style_sheet() -> str:
    """Text of assets/style.qss, or "" when it is missing (Qt's default look)."""
    path = asset_path("style.qss")
    try:
        return path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return ""
