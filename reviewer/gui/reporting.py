"""Where the window's error messages go: a dialog for a person, a list for a test.

The window takes a reporter when it is built, so a test passes ``MessageLog()`` and reads
what a reviewer would have been told, instead of switching dialogs off by an environment
variable.
"""

from __future__ import annotations

from typing import Protocol

from PySide6.QtWidgets import QMessageBox, QWidget


class Reporter(Protocol):
    """Tells the reviewer that something went wrong, or needs care (our own words)."""

    def error(self, parent: QWidget | None, message: str) -> None: ...

    def warning(self, parent: QWidget | None, message: str) -> None: ...


class DialogReporter:
    """A warning box: what a person running the window sees."""

    def error(self, parent: QWidget | None, message: str) -> None:
        QMessageBox.warning(parent, "Margin Reviewer", message)

    def warning(self, parent: QWidget | None, message: str) -> None:
        QMessageBox.information(parent, "Margin Reviewer", message)


class MessageLog:
    """Collects the messages instead of showing them (tests, scripted runs)."""

    def __init__(self) -> None:
        self.messages: list[str] = []

    def error(self, parent: QWidget | None, message: str) -> None:
        self.messages.append(message)

    def warning(self, parent: QWidget | None, message: str) -> None:
        self.messages.append(message)

    @property
    def last(self) -> str:
        return self.messages[-1] if self.messages else ""
