"""Column roles: which column is the label, which the id, which are features, which are ignored."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from reviewer.core.data.loading import label_strings
from reviewer.core.errors import InputError

KINDS = ("numeric", "categorical", "text", "vector", "ignore")
MAX_CATEGORY_LEVELS = 200
# A text column is numeric when this share of its values parse as numbers.
NUMERIC_SHARE = 0.95
# ISO 8601 dates and date-times, optionally with a time part (the open standard's layout).
NO_TEXT = "no text"
"""The reason a text column with every value missing or blank is ignored."""
DATE_PATTERN = r"^\d{4}-\d{2}-\d{2}([T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$"


@dataclass
class ColumnRoles:
    label: str
    id: str | None
    numeric: list[str] = field(default_factory=list)
    categorical: list[str] = field(default_factory=list)
    ignored: dict[str, str] = field(default_factory=dict)  # column -> reason
    text: list[str] = field(default_factory=list)  # free text: TF-IDF features
    vector: list[str] = field(default_factory=list)  # a list of numbers per row

    @property
    def features(self) -> list[str]:
        return [*self.numeric, *self.categorical, *self.text, *self.vector]

    def kind_of(self, column: str) -> str:
        """The column's kind: label, id, one of KINDS."""
        if column == self.label:
            return "label"
        if column == self.id:
            return "id"
        for kind in ("numeric", "categorical", "text", "vector"):
            if column in getattr(self, kind):
                return kind
        return "ignore"

    def to_dict(self) -> dict:
        return {
            "label": self.label,
            "id": self.id,
            "numeric": list(self.numeric),
            "categorical": list(self.categorical),
            "text": list(self.text),
            "vector": list(self.vector),
            "ignored": dict(self.ignored),
        }

    @classmethod
    def from_dict(cls, data: Mapping) -> ColumnRoles:
        return cls(
            label=data["label"],
            id=data.get("id"),
            numeric=list(data.get("numeric", [])),
            categorical=list(data.get("categorical", [])),
            ignored=dict(data.get("ignored", {})),
            text=list(data.get("text") or []),
            vector=list(data.get("vector") or []),
        )


def guess_label_column(frame: pd.DataFrame) -> str | None:
    """A plausible label column: a conventional name first, else the last low-cardinality one."""
    usual = ("label", "class", "target", "y", "grade", "category", "outcome")
    for name in frame.columns:
        if str(name).strip().lower() in usual:
            return name
    for name in reversed(list(frame.columns)):
        s = frame[name]
        n_unique = s.nunique(dropna=True)
        if 2 <= n_unique <= min(20, max(2, len(s) // 5)):
            return name
    return None


def guess_id_column(frame: pd.DataFrame, label: str | None = None) -> str | None:
    """A column whose every value is present and distinct, preferring id-like names."""
    candidates = []
    for name in frame.columns:
        if name == label:
            continue
        s = frame[name]
        if s.isna().any() or s.nunique() != len(s):
            continue
        if pd.api.types.is_float_dtype(s.dtype):
            continue
        lowered = str(name).lower()
        named = lowered == "id" or lowered.endswith(("_id", " id", "id_")) or "key" in lowered
        candidates.append((not named, list(frame.columns).index(name), name))
    return min(candidates)[2] if candidates else None


def infer_roles(
    frame: pd.DataFrame,
    label: str,
    id_column: str | None = None,
    overrides: Mapping[str, str] | None = None,
    *,
    require_features: bool = True,
) -> ColumnRoles:
    """Decide each column's role. ``overrides`` maps a column to one of KINDS.
    ``require_features=False`` accepts a table with no feature column (its features come
    from a vectors file).

    A column chosen as text that holds no text at all (every value missing or blank) is
    ignored with the reason "no text"; a table whose only feature is text is accepted."""
    columns = list(frame.columns)
    if label not in columns:
        raise InputError(f"label column {label!r} not found; columns are {_list(columns)}")
    if id_column is not None:
        if id_column not in columns:
            raise InputError(f"id column {id_column!r} not found; columns are {_list(columns)}")
        if id_column == label:
            raise InputError(f"column {label!r} cannot be both the label and the id")
        check_unique_ids(frame[id_column], id_column)
    overrides = dict(overrides or {})
    for col, kind in overrides.items():
        if col not in columns:
            raise InputError(f"column {col!r} in the role choices is not in the table")
        if kind not in KINDS:
            raise InputError(f"column {col!r}: role {kind!r} is not one of {', '.join(KINDS)}")
    roles = ColumnRoles(label=label, id=id_column)
    for col in columns:
        if col in (label, id_column):
            continue
        chosen = overrides.get(col)
        if chosen is None:
            kind, reason = infer_kind(frame[col])
        else:
            kind, reason = chosen, "ignored by choice" if chosen == "ignore" else ""
            if kind == "text" and not has_text(frame[col]):
                kind, reason = "ignore", NO_TEXT
        if kind == "ignore":
            roles.ignored[col] = reason
        else:
            getattr(roles, kind).append(col)
    if not roles.features and require_features:
        reasons = "; ".join(f"{c}: {r}" for c, r in roles.ignored.items()) or "no other columns"
        raise InputError(f"no usable feature column besides the label ({reasons})")
    return roles


def infer_kind(values: pd.Series) -> tuple[str, str]:
    """(kind, reason): numeric, categorical, or ignore with the reason shown to the user."""
    s = values
    present = s.dropna()
    n, n_present = len(s), len(present)
    if n_present == 0:
        return "ignore", "all values missing"
    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        return "ignore", "date or time (not used as a feature)"
    if pd.api.types.is_bool_dtype(s.dtype):
        return ("numeric", "") if present.nunique() > 1 else ("ignore", "constant")
    if s.dtype == object and isinstance(present.iloc[0], (list, tuple, np.ndarray, dict)):
        if _looks_like_vectors(present):
            return "vector", ""
        return "ignore", "a list or record per row that is not a list of numbers"
    if not pd.api.types.is_numeric_dtype(s.dtype) and not has_text(present):
        return "ignore", NO_TEXT
    n_unique = present.nunique()
    if n_unique <= 1:
        return "ignore", "constant"
    if pd.api.types.is_numeric_dtype(s.dtype):
        if pd.api.types.is_integer_dtype(s.dtype) and n_unique == n and n > 20:
            arr = present.to_numpy()
            if np.all(np.diff(arr) > 0) or np.all(np.diff(arr) < 0):
                return "ignore", "identifier-like (distinct, ordered whole numbers)"
        return "numeric", ""
    as_num = pd.to_numeric(present.astype(str).str.strip(), errors="coerce")
    if as_num.notna().mean() >= NUMERIC_SHARE:
        return "numeric", ""
    text = present.astype(str)
    if text.str.match(DATE_PATTERN).mean() >= NUMERIC_SHARE:
        return "ignore", "date or time (not used as a feature)"
    if n_unique == n_present and n_present > 20:
        if text.str.contains(r"\s").mean() > 0.5:
            return "text", ""
        return "ignore", "identifier-like (every value distinct)"
    # Judged on the distinct values, so a column whose rows mostly repeat a marker (say
    # "n/a") around real sentences still reads as text.
    distinct = text.drop_duplicates()
    if distinct.str.len().mean() > 40 and distinct.str.contains(r"\s").mean() > 0.5:
        return "text", ""
    if n_unique > MAX_CATEGORY_LEVELS:
        if text.str.contains(r"\s").mean() > 0.5:
            return "text", ""
        return "ignore", f"too many distinct values ({n_unique:,}) for a category"
    return "categorical", ""


def has_text(values: pd.Series) -> bool:
    """Whether any value is text with something other than white space in it."""
    present = values.dropna()
    if len(present) == 0:
        return False
    return bool(present.astype(str).str.strip().str.len().gt(0).any())


def _looks_like_vectors(present: pd.Series) -> bool:
    """Lists (or arrays) of numbers, judged on a sample of the rows; the full check (same
    length, finite numbers) comes when the features are built, with its own message."""
    for value in present.iloc[:50]:
        if isinstance(value, dict):
            return False
        try:
            arr = np.asarray(value)
        except (ValueError, TypeError):  # nested lists of different lengths
            return False
        if arr.ndim != 1 or not (
            np.issubdtype(arr.dtype, np.number) or np.issubdtype(arr.dtype, np.bool_)
        ):
            return False
    return True


def check_unique_ids(values: pd.Series, column: str) -> None:
    ids = label_strings(values)
    missing = [i for i, v in enumerate(ids) if v is None]
    if missing:
        raise InputError(
            f"id column {column!r} has {len(missing)} empty value(s), e.g. row {missing[0]}"
        )
    series = pd.Series(ids)
    dup = series[series.duplicated(keep=False)]
    if len(dup):
        first = dup.iloc[0]
        rows = list(dup.index[dup == first][:3])
        raise InputError(
            f"id column {column!r} has duplicate values ({dup.nunique()} repeated), "
            f"e.g. {first!r} at rows {', '.join(map(str, rows))}"
        )


def _list(columns: list) -> str:
    shown = ", ".join(repr(str(c)) for c in columns[:12])
    return shown + (f", ... ({len(columns)} in all)" if len(columns) > 12 else "")
