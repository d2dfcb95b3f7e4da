"""Signals shared by the window's parts, so panels never reach into each other."""

from __future__ import annotations

from PySide6.QtCore import QObject, Signal


class ReviewBus(QObject):
    """One per window. Panels emit and listen; the session stays the only source of truth.

    - ``row_selected(int)``: the current row (table position) changed; any panel may emit.
    - ``rows_filter(object)``: a boolean mask over table rows to narrow the triage list to,
      or None to clear (e.g. the slack histogram's threshold).
    - ``labels_changed()``: an edit, undo or redo changed labels, exclusions or review states.
    - ``fit_changed()``: a new fit (latest or baseline) is in place.
    - ``refit_requested(object)``: a panel asks for a refit with these FitSettings.
    """

    row_selected = Signal(int)
    rows_filter = Signal(object)
    labels_changed = Signal()
    fit_changed = Signal()
    refit_requested = Signal(object)
