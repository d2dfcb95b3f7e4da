"""One prepared data set: the loaded table, its roles, its feature matrix, labels and ids.

Opening a session, a scan and a probe all start from here, so they read a table the same
way: load, decide roles, build features, read the labels as text, name every row.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import LoadedTable, label_strings
from reviewer.core.data.roles import ColumnRoles, infer_roles


@dataclass
class Dataset:
    loaded: LoadedTable
    roles: ColumnRoles
    X: np.ndarray
    feature_names: list[str]
    labels: np.ndarray  # the label column as text, None where missing
    ids: np.ndarray  # the id column as text, else the 0-based data-row position

    @property
    def frame(self) -> pd.DataFrame:
        return self.loaded.frame


def row_ids(frame: pd.DataFrame, id_column: str | None) -> np.ndarray:
    """The id column as text, else the 0-based data-row position."""
    if id_column is None:
        return np.arange(len(frame)).astype(str).astype(object)
    return label_strings(frame[id_column])


def prepare_dataset(
    loaded: LoadedTable,
    roles: ColumnRoles | None = None,
    *,
    label: str | None = None,
    id_column: str | None = None,
    overrides: Mapping[str, str] | None = None,
) -> Dataset:
    """Roles (given, or inferred from ``label``, ``id_column`` and ``overrides``), features,
    labels and ids of a loaded table."""
    if roles is None:
        roles = infer_roles(loaded.frame, label, id_column, overrides)
    X, names = feature_matrix(loaded.frame, roles)
    return Dataset(
        loaded=loaded,
        roles=roles,
        X=X,
        feature_names=names,
        labels=label_strings(loaded.frame[roles.label]),
        ids=row_ids(loaded.frame, roles.id),
    )
