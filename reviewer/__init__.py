"""Margin Reviewer: rank rows of a labelled table by soft-margin slack and review them.

The notebook door: ``scan`` and ``probe`` (one call on a DataFrame or a file), ``ReviewSession``
(open a table, decide, undo, fit, export), ``FitSettings``, ``SoftMarginClassifier`` (the
scikit-learn estimator every fit uses) and the project's error types.
They are imported on first use, so ``import reviewer`` stays quick for the command line.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from reviewer._version import __version__

_LAZY = {
    "scan": "reviewer.api",
    "probe": "reviewer.api",
    "ReviewSession": "reviewer.core.door",
    "SoftMarginClassifier": "reviewer.core.door",
    "FitSettings": "reviewer.core.values",
    "ReviewerError": "reviewer.core.errors",
    "InputError": "reviewer.core.errors",
    "SettingsError": "reviewer.core.errors",
    "SessionError": "reviewer.core.errors",
    "SessionLockedError": "reviewer.core.errors",
    "SourceChangedError": "reviewer.core.errors",
    "ExportError": "reviewer.core.errors",
    "Cancelled": "reviewer.core.errors",
}

__all__ = [
    "Cancelled",
    "ExportError",
    "FitSettings",
    "InputError",
    "ReviewSession",
    "ReviewerError",
    "SessionError",
    "SessionLockedError",
    "SettingsError",
    "SoftMarginClassifier",
    "SourceChangedError",
    "__version__",
    "probe",
    "scan",
]

if TYPE_CHECKING:
    from reviewer.api import probe, scan
    from reviewer.core.door import ReviewSession, SoftMarginClassifier
    from reviewer.core.errors import (
        Cancelled,
        ExportError,
        InputError,
        ReviewerError,
        SessionError,
        SessionLockedError,
        SettingsError,
        SourceChangedError,
    )
    from reviewer.core.values import FitSettings


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'reviewer' has no attribute {name!r}")
