"""Which features pushed one row towards the model's label: per-feature contributions of a
linear soft-margin fit.

For a linear kernel each class's decision is f_c(x) = w_c . x + b_c, a sum of one term per
feature. The model prefers its label m over the given label g by

    f_m(x) - f_g(x) = sum_j x_j (w_m,j - w_g,j) + (b_m - b_g),

so x_j (w_m,j - w_g,j) is what feature j adds to that preference (one weight vector per class,
one class against the rest). With two classes there is one problem, f(x) = w . x + b, positive
for the second class; the contribution is sign * x_j w_j with sign +1 when the label explained
is the second class, -1 when it is the first. When the model agrees with the given label the
contributions explain the given label against its best rival (the other class with the
highest decision value for the row). Only features with x_j != 0 can contribute.

Text features are named "{column}::w:{term}" (word n-grams) and "{column}::c:{term}"
(character n-grams); those are what the window highlights in the row's text.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp

COLUMNS = ("column", "term", "kind", "feature", "value", "contribution")
KIND_MARKS = {"w": "word", "c": "char"}


def split_feature_name(name: str) -> tuple[str, str, str]:
    """(column, term, kind) of a feature name; kind is "word", "char" or "other"."""
    col, sep, rest = name.partition("::")
    if sep and len(rest) >= 2 and rest[1] == ":" and rest[0] in KIND_MARKS:
        return col, rest[2:], KIND_MARKS[rest[0]]
    return name, name, "other"


def empty_contributions(
    reason: str, towards: str | None = None, against: str | None = None
) -> pd.DataFrame:
    out = pd.DataFrame(
        {c: pd.Series(dtype=float if c in ("value", "contribution") else object) for c in COLUMNS}
    )
    out.attrs.update(reason=reason, towards=towards, against=against, offset=float("nan"))
    return out


def _row_entries(X_row: object) -> tuple[np.ndarray, np.ndarray]:
    """(feature indices, values) of the row's nonzero entries."""
    if sp.issparse(X_row):
        row = sp.csr_matrix(X_row)
        if row.shape[0] != 1:
            raise ValueError(f"expected one row, got a matrix of shape {row.shape}")
        row.sum_duplicates()
        keep = row.data != 0
        return row.indices[keep].astype(np.int64), np.asarray(row.data[keep], dtype=float)
    x = np.asarray(X_row, dtype=float).ravel()
    idx = np.flatnonzero(x)
    return idx, x[idx]


def term_contributions(
    X_row: object,
    names: Sequence[str],
    weights: Sequence[np.ndarray | None],
    intercepts: Sequence[float],
    classes: Sequence[str],
    given_label: str | None,
    model_label: str,
    k: int = 12,
    *,
    all_features: bool = False,
) -> pd.DataFrame:
    """Per-feature contributions x_j (w_model,j - w_given,j) for one row (see the module notes).

    ``weights``/``intercepts``: one per fitted problem (a class against the rest; a single
    problem, positive for ``classes[1]``, when there are two classes); a weight of None means a
    non-linear kernel. ``X_row`` is one row, dense or a 1-row sparse matrix.

    By default returns the ``k`` largest positive contributions of text features (what the
    window highlights); with ``all_features`` every feature the row has (x_j != 0), any sign
    and kind, so their sum plus ``attrs["offset"]`` (the intercept difference) is the decision
    difference. Columns: column, term, kind ("word", "char", "other"), feature, value (x_j),
    contribution; largest first. ``attrs`` holds "towards" and "against" (the labels compared),
    "offset", and "reason": empty when contributions were computed, else why not.
    """
    classes = [str(c) for c in classes]
    model_label = str(model_label)
    if not weights or any(w is None for w in weights):
        return empty_contributions(
            "per-term contributions need a linear kernel; this fit is not linear"
        )
    if model_label not in classes:
        return empty_contributions(f"the model's label {model_label!r} is not a class of the fit")
    W = [np.asarray(w, dtype=float).ravel() for w in weights if w is not None]
    b = [float(v) for v in intercepts]
    if any(len(w) != len(names) for w in W):
        return empty_contributions("the fit's weights do not match the current features; fit again")
    idx, x = _row_entries(X_row)
    given = None if given_label is None else str(given_label)

    if len(classes) == 2:
        if len(W) != 1:
            raise ValueError("two classes need exactly one problem")
        towards = model_label
        against = classes[1 - classes.index(model_label)]
        sign = 1.0 if towards == classes[1] else -1.0
        diff_w = sign * W[0]
        offset = sign * b[0]
    else:
        if len(W) != len(classes):
            raise ValueError(f"{len(classes)} classes need {len(classes)} problems")
        if given is not None and given in classes and given != model_label:
            towards, against = model_label, given
        else:
            # The model agrees (or the row has no usable label): the label against its best
            # rival for this row.
            towards = given if given is not None and given in classes else model_label
            t = classes.index(towards)
            scores = [
                float(x @ W[c][idx]) + b[c] if c != t else -np.inf for c in range(len(classes))
            ]
            against = classes[int(np.argmax(scores))]
        ti, ai = classes.index(towards), classes.index(against)
        diff_w = W[ti] - W[ai]
        offset = b[ti] - b[ai]

    contrib = x * diff_w[idx]
    parts = [split_feature_name(str(names[j])) for j in idx]
    frame = pd.DataFrame(
        {
            "column": [p[0] for p in parts],
            "term": [p[1] for p in parts],
            "kind": [p[2] for p in parts],
            "feature": [str(names[j]) for j in idx],
            "value": x,
            "contribution": contrib,
        },
        columns=list(COLUMNS),
    )
    frame = frame.sort_values("contribution", ascending=False, kind="mergesort")
    if not all_features:
        frame = frame[(frame["kind"] != "other") & (frame["contribution"] > 0)].head(max(k, 0))
    frame = frame.reset_index(drop=True)
    frame.attrs.update(reason="", towards=towards, against=against, offset=float(offset))
    return frame
