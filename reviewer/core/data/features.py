"""Turn a table into a feature matrix with scikit-learn's own transformers."""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.compose import ColumnTransformer
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import (
    FunctionTransformer,
    OneHotEncoder,
)

from reviewer.core.data.numeric import NumericStandardiser
from reviewer.core.data.roles import ColumnRoles
from reviewer.core.errors import InputError

MISSING_CATEGORY = "(missing)"


def _as_float(frame: pd.DataFrame) -> np.ndarray:
    """Numbers as float64; text that does not parse and infinities become missing."""
    cols = [pd.to_numeric(frame[c], errors="coerce") for c in frame.columns]
    out = np.column_stack([c.to_numpy(dtype=float, na_value=np.nan) for c in cols])
    out[~np.isfinite(out)] = np.nan
    return out


def _as_text(frame: pd.DataFrame) -> np.ndarray:
    out = frame.astype(object).to_numpy(copy=True)
    missing = pd.isna(out)
    out = out.astype(str)
    out[missing] = MISSING_CATEGORY
    return out.astype(object)


def build_feature_transformer(roles: ColumnRoles) -> ColumnTransformer:
    """Numeric: median-impute then standardise; categorical: one-hot, unknown levels ignored."""
    parts = []
    if roles.numeric:
        numeric = NumericStandardiser()  # as to_numeric, MaxAbs, median fill, StandardScaler
        parts.append(("numeric", numeric, list(roles.numeric)))
    if roles.categorical:
        categorical = Pipeline(
            [
                ("to_text", FunctionTransformer(_as_text, feature_names_out="one-to-one")),
                (
                    "one_hot",
                    OneHotEncoder(handle_unknown="ignore", sparse_output=False, dtype=np.float64),
                ),
            ]
        )
        parts.append(("categorical", categorical, list(roles.categorical)))
    return ColumnTransformer(parts, remainder="drop", verbose_feature_names_out=False)


def feature_matrix(frame: pd.DataFrame, roles: ColumnRoles) -> tuple[np.ndarray, list[str]]:
    """Fit the transformer on the whole table and return (X, feature names)."""
    transformer = build_feature_transformer(roles)
    X = transformer.fit_transform(frame)
    X = np.ascontiguousarray(X, dtype=np.float64)
    names = [str(n) for n in transformer.get_feature_names_out()]
    bad = ~np.isfinite(X).all(axis=0)
    if bad.any():
        shown = ", ".join(repr(names[i]) for i in np.flatnonzero(bad)[:5])
        raise InputError(f"feature column(s) {shown} could not be scaled to finite numbers")
    return X, names
