"""The review queue rules: what a filter shows and which row comes next."""

from __future__ import annotations

import numpy as np

from reviewer.core.review.queue import ATTENTION, next_open_position, row_mask
from reviewer.core.values import CONFIRMED, EXCLUDED, OPEN, RELABELLED

ZONES = np.array(["clear", "wrong_side", "inside_margin", "clear", "wrong_side"], dtype=object)
LABELS = np.array(["a", "b", "a", None, "b"], dtype=object)
REVIEW = np.array([OPEN, CONFIRMED, OPEN, EXCLUDED, RELABELLED], dtype=np.int8)
IDS = np.array(["Lot-01", "lot-02", "LOT-13", "x", "y"], dtype=object)


def test_no_filter_shows_every_row_as_none() -> None:
    assert row_mask(5, zones=ZONES, labels=LABELS, review=REVIEW, ids=IDS) is None


def test_attention_means_wrong_side_or_inside_margin() -> None:
    mask = row_mask(5, zones=ZONES, zone=ATTENTION)
    assert mask is not None
    assert mask.tolist() == [False, True, True, False, True]
    assert row_mask(5, zones=ZONES, zone="clear").tolist() == [True, False, False, True, False]


def test_filters_combine_and_ids_match_any_part_ignoring_case() -> None:
    mask = row_mask(5, zones=ZONES, zone=ATTENTION, labels=LABELS, label="b", review=REVIEW)
    assert mask.tolist() == [False, True, False, False, True]
    assert row_mask(5, review=REVIEW, state="open").tolist() == [1, 0, 1, 0, 0]
    assert row_mask(5, ids=IDS, id_text=" lot-0").tolist() == [1, 1, 0, 0, 0]
    extra = np.array([1, 1, 1, 1, 0], dtype=bool)
    assert row_mask(5, ids=IDS, id_text="lot", extra=extra).tolist() == [1, 1, 1, 0, 0]


def test_next_row_is_the_first_open_one_at_or_after_the_start() -> None:
    review = np.array([OPEN, CONFIRMED, CONFIRMED, OPEN, EXCLUDED])
    assert next_open_position(review, 1) == 3
    assert next_open_position(review, 0) == 0
    # Nothing open after the start: stay at the start while it is in the list.
    assert next_open_position(review, 4) == 4
    assert next_open_position(review, 5) is None
