"""Start the window: ``run_window`` is what ``margin-reviewer demo`` and ``open`` call."""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

from PySide6.QtWidgets import QApplication

from reviewer.core.door import APP_NAME
from reviewer.gui import resources
from reviewer.gui.main_window import MainWindow
from reviewer.gui.platform_check import check_window_can_start


def demo_copy(source: Path, folder: Path | None = None) -> Path:
    """The per-user copy of a demo file (made on first use), so its session never lands in the
    repository and the demo resumes where it was left."""
    if folder is None:
        from platformdirs import user_data_dir

        folder = Path(user_data_dir(APP_NAME, appauthor=False)) / "demo"
    folder.mkdir(parents=True, exist_ok=True)
    target = folder / Path(source).name
    if not target.exists():
        shutil.copy2(source, target)
    return target


def make_app() -> QApplication:
    app = QApplication.instance()
    if not isinstance(app, QApplication):
        app = QApplication(sys.argv[:1])
        app.setApplicationName("Margin Reviewer")
        app.setOrganizationName(APP_NAME)
    app.setStyleSheet(resources.load_style_sheet())
    return app


def build_window(
    path: Path | None,
    *,
    label: str | None = None,
    id_column: str | None = None,
    session: str | None = None,
    demo: bool = False,
    overrides: dict[str, str] | None = None,
    vectors: Path | None = None,
) -> MainWindow:
    """The window with ``path`` opened as asked (roles dialog when no label is given);
    ``overrides`` sets column kinds, ``vectors`` adds a .npy vectors file."""
    window = MainWindow()
    if path is not None:
        if demo:
            # The demo's copy lives in a per-user data folder; exports go where it started.
            window.export_folder = Path.cwd()
        path = demo_copy(Path(path)) if demo else Path(path)
        window.open_path(
            path,
            label=label,
            id_column=id_column,
            session_path=session,
            overrides=overrides,
            vectors=vectors,
        )
    return window


def run_window(
    path: Path | None,
    *,
    label: str | None = None,
    id_column: str | None = None,
    session: str | None = None,
    demo: bool = False,
    overrides: dict[str, str] | None = None,
    vectors: Path | None = None,
) -> int:
    """Open the review window and run until it closes; returns the exit code.

    Raises WindowCannotStart (a ReviewerError: the command line prints one ``error:`` line)
    when Qt could not show a window here, before Qt gets the chance to abort the process.
    """
    if not isinstance(QApplication.instance(), QApplication):
        check_window_can_start()
    app = make_app()
    window = build_window(
        path,
        label=label,
        id_column=id_column,
        session=session,
        demo=demo,
        overrides=overrides,
        vectors=vectors,
    )
    window.show()
    return int(app.exec())
