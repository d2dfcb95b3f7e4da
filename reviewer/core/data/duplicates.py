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
    labelled = np.flatnonzero(~pd.isna(labels))
    # Hash with pandas (vectorised): only rows whose hash another labelled row shares can be
    # duplicates. Those few are then grouped by their values, so a hash collision can never
    # join two different rows.
    keys = pd.util.hash_pandas_object(features, index=False).to_numpy()[labelled]
    shared = pd.Series(keys).duplicated(keep=False).to_numpy()
    rows = labelled[shared]
    if len(rows) < 2:
        return []
    same = features.iloc[rows]
    by = [keys[shared], *(same[c].to_numpy() for c in same.columns)]
    group = same.groupby(by, dropna=False, sort=False).ngroup().to_numpy()
    texts = labels[rows].astype(str)
    mixed = pd.Series(texts).groupby(group).nunique().to_numpy() > 1
    keep = mixed[group]
    rows, group = rows[keep], group[keep]
    order = np.lexsort((rows, group))  # by group, rows ascending within each
    rows, group = rows[order], group[order]
    starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
    groups = [part.tolist() for part in np.split(rows, starts[1:])] if len(rows) else []
    groups.sort(key=lambda g: g[0])
    return groups
