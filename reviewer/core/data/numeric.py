"""Numeric columns to standardised float64 in one pass per column, as a scikit-learn transformer.

It gives what the pipeline ``to_numeric -> MaxAbsScaler -> SimpleImputer(median) ->
StandardScaler`` gives (to rounding), without its copies: each column is read once into the
output array, the median is taken only for a column with a missing value, and the scaling
is done in place. Text that does not parse and infinities count as missing. Dividing by the
column's largest magnitude first keeps values near 1e308 from overflowing the variance.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin

_EPS = np.finfo(np.float64).eps


def column_as_float(values: pd.Series) -> np.ndarray:
    """One column as float64; text that does not parse and infinities become NaN.

    Returns a new array the caller may change."""
    dtype = values.dtype
    if pd.api.types.is_bool_dtype(dtype) or pd.api.types.is_numeric_dtype(dtype):
        numbers = values
    else:
        numbers = pd.to_numeric(values, errors="coerce")
    out = np.array(numbers.to_numpy(dtype=np.float64, na_value=np.nan), dtype=np.float64)
    bad = ~np.isfinite(out)
    if bad.any():
        out[bad] = np.nan
    return out


class NumericStandardiser(TransformerMixin, BaseEstimator):
    """Standardise numeric columns: bound by the largest magnitude, fill a missing value with
    the column's median, centre and divide by the standard deviation (1 for a constant)."""

    def fit(self, X: pd.DataFrame, y: Any = None) -> NumericStandardiser:
        self.fit_transform(X)
        return self

    def fit_transform(self, X: pd.DataFrame, y: Any = None, **fit_params: Any) -> np.ndarray:
        frame = _as_frame(X)
        self.feature_names_in_ = np.asarray([str(c) for c in frame.columns], dtype=object)
        self.n_features_in_ = frame.shape[1]
        n, d = frame.shape
        out = np.empty((n, d), dtype=np.float64)
        bound = np.ones(d)
        fill = np.zeros(d)
        mean = np.zeros(d)
        scale = np.ones(d)
        for j in range(d):
            col = column_as_float(frame.iloc[:, j])
            missing = np.isnan(col)
            any_missing = bool(missing.any())
            present = col[~missing] if any_missing else col
            if len(present) == 0:
                out[:, j] = 0.0  # an empty column stays in the matrix as zeros
                continue
            top = float(np.max(np.abs(present)))
            bound[j] = top if top >= 10 * _EPS else 1.0
            col /= bound[j]
            if any_missing:
                fill[j] = float(np.median(col[~missing]))
                col[missing] = fill[j]
            # Mean and the two-pass variance with its correction term, as StandardScaler.
            total = float(np.sum(col))
            mean[j] = total / n
            centred = col - mean[j]
            correction = float(np.sum(centred))
            centred *= centred
            var = (float(np.sum(centred)) - correction**2 / n) / n
            # A variance within rounding of zero is a constant column (StandardScaler's rule).
            constant = var <= n * _EPS * var + (n * mean[j] * _EPS) ** 2
            scale[j] = 1.0 if constant else float(np.sqrt(var))
            col -= mean[j]
            col /= scale[j]
            out[:, j] = col
        self.bound_, self.fill_, self.mean_, self.scale_ = bound, fill, mean, scale
        return out

    def transform(self, X: pd.DataFrame) -> np.ndarray:
        frame = _as_frame(X)
        out = np.empty(frame.shape, dtype=np.float64)
        for j in range(frame.shape[1]):
            col = column_as_float(frame.iloc[:, j])
            col /= self.bound_[j]
            col[np.isnan(col)] = self.fill_[j]
            col -= self.mean_[j]
            col /= self.scale_[j]
            out[:, j] = col
        return out

    def get_feature_names_out(self, input_features: Any = None) -> np.ndarray:
        return np.asarray(self.feature_names_in_, dtype=object)


def _as_frame(X: Any) -> pd.DataFrame:
    return X if isinstance(X, pd.DataFrame) else pd.DataFrame(X)
