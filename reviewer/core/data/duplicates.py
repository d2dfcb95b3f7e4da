"""Rows that share every feature value but carry different labels: a classic sign of label noise.

No classifier can separate such rows, so each group costs slack whatever the settings;
showing them as groups lets a reviewer settle them together.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from reviewer.core.data.roles import ColumnRoles
from reviewer.core.errors import InputError


def conflicting_duplicates(
    frame: pd.DataFrame, roles: ColumnRoles, labels: Sequence[object] | np.ndarray
) -> list[list[int]]:
    """Groups (0-based row positions, ascending) of rows with identical features, mixed labels.

    Missing values count as equal to each other; rows without a label are left out of the
    comparison. Groups are ordered by their first row.
    """
    labels = np.asarray(labels, dtype=object)
    if len(labels) != len(frame):
        raise InputError(f"{len(labels)} labels given for a table of {len(frame)} rows")
    missing = [c for c in roles.features if c not in frame.columns]
    if missing:
        raise InputError(f"feature column(s) not in the table: {', '.join(map(repr, missing))}")
    if not roles.features or len(frame) < 2:
        return []
    features = frame[roles.features].reset_index(drop=True)
    # Hash with pandas (vectorised); rows in the same hash bucket are then compared by value,
    # so a hash collision can never join two different rows.
    keys = pd.util.hash_pandas_object(features, index=False).to_numpy()
    has_label = np.array([v is not None and not pd.isna(v) for v in labels], dtype=bool)
    order = np.argsort(keys, kind="stable")
    sorted_keys = keys[order]
    starts = np.flatnonzero(np.r_[True, sorted_keys[1:] != sorted_keys[:-1]])
    ends = np.r_[starts[1:], len(order)]
    groups: list[list[int]] = []
    for a, b in zip(starts, ends, strict=True):
        if b - a < 2:
            continue
        rows = [int(r) for r in np.sort(order[a:b]) if has_label[r]]
        if len(rows) < 2:
            continue
        by_value: dict[tuple, list[int]] = {}
        for r in rows:
            value = tuple("\0missing" if pd.isna(v) else repr(v) for v in features.iloc[r])
            by_value.setdefault(value, []).append(r)
        for members in by_value.values():
            if len(members) > 1 and len({str(labels[r]) for r in members}) > 1:
                groups.append(members)
    groups.sort(key=lambda g: g[0])
    return groups
