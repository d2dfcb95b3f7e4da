"""The project's own error types. Each message names the file, column or value at fault."""

from __future__ import annotations


class ReviewerError(Exception):
    """Base of every error this package raises on purpose."""


class InputError(ReviewerError):
    """The input file or table cannot be used (missing, unreadable, not a table, bad roles)."""


class SettingsError(ReviewerError):
    """A fit setting is out of range or inconsistent with the data."""


class SessionError(ReviewerError):
    """A session file cannot be opened, written or replayed."""


class SourceChangedError(SessionError):
    """The data file's SHA-256 differs from the one recorded in the session."""


class SessionLockedError(SessionError):
    """Another process already has the session open for writing."""


class ExportError(ReviewerError):
    """An export could not be written; nothing partial was left behind."""


class Cancelled(ReviewerError):
    """Long work was cancelled by the user; whatever was in place before stays."""
