"""GUI tests run without a display: choose Qt's offscreen platform before Qt is imported."""

import os

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")


@pytest.fixture(autouse=True)
def _private_settings(tmp_path):
    # Recent files and the saved window layout go to an INI file under tmp_path, never the
    # tester's own settings.
    from PySide6.QtCore import QSettings

    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(tmp_path / "ini"))
