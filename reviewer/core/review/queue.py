"""Review queue rules: which rows need a look, which rows a filter shows, which row is next.

The window asks these questions; the answers are rules of the review, so they live here.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from reviewer.core.values import OPEN, REVIEW_NAMES

NEEDS_A_LOOK = ("wrong_side", "inside_margin")
"""Zones whose rows need a look: the model disagrees with the label, or is unsure of it."""
ATTENTION = "attention"
"""The zone filter's name for rows in any zone of ``NEEDS_A_LOOK``."""


def row_mask(
    n_rows: int,
    *,
    zones: np.ndarray | None = None,
    zone: str | None = None,
    labels: np.ndarray | None = None,
    label: str | None = None,
    review: np.ndarray | None = None,
    state: str | None = None,
    ids: Sequence[object] | np.ndarray | None = None,
    id_text: str = "",
    extra: np.ndarray | None = None,
) -> np.ndarray | None:
    """Rows a filter shows, as a boolean mask; None when every row is shown.

    ``zone`` is a zone code or ``ATTENTION``; ``state`` a review state name; ``id_text``
    matches any part of the id, ignoring case; ``extra`` is a further mask (for example
    the slack histogram's threshold). A filter left at None (or "") does not filter.
    """
    mask = np.ones(n_rows, dtype=bool)
    if zone and zones is not None:
        z = np.asarray(zones, dtype=object)
        mask &= np.isin(z, NEEDS_A_LOOK) if zone == ATTENTION else z == zone
    if label is not None and labels is not None:
        mask &= np.asarray(labels, dtype=object) == label
    if state and review is not None:
        mask &= np.asarray(review) == REVIEW_NAMES.index(state)
    text = id_text.strip().lower()
    if text and ids is not None:
        mask &= np.fromiter((text in str(v).lower() for v in ids), dtype=bool, count=n_rows)
    if extra is not None and len(extra) == n_rows:
        mask &= np.asarray(extra, dtype=bool)
    return None if mask.all() else mask


def next_open_position(review_in_view: np.ndarray, start: int) -> int | None:
    """Position (in view order) to move to after a decision: the first open row at or after
    ``start``; if none is left, ``start`` itself while it is still in the view, else None.

    ``review_in_view`` holds the review codes of the rows in the order the list shows them.
    """
    review_in_view = np.asarray(review_in_view)
    after = np.flatnonzero(review_in_view[start:] == OPEN)
    if after.size:
        return start + int(after[0])
    if start < len(review_in_view):
        return start
    return None
