"""Labels, row ids and duplicate groups on 100,000 rows equal a plain row-by-row reading."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.dataset import row_ids
from reviewer.core.data.duplicates import conflicting_duplicates
from reviewer.core.data.loading import label_strings
from reviewer.core.data.roles import ColumnRoles

N = 100_000


def _label_strings_row_by_row(values: pd.Series) -> list[str | None]:
    """The rule written out plainly: missing -> None; a whole float prints as an integer,
    another float as repr; anything else as its stripped text, None when empty."""
    out: list[str | None] = []
    is_float = pd.api.types.is_float_dtype(values.dtype)
    for v in values.tolist():
        if v is None or (not isinstance(v, str) and pd.isna(v)):
            out.append(None)
        elif is_float and np.isfinite(v) and float(v).is_integer():
            out.append(str(int(v)))
        elif is_float:
            out.append(repr(float(v)))
        else:
            text = str(v).strip()
            out.append(text if text else None)
    return out


def _columns(rng: np.random.Generator) -> dict[str, pd.Series]:
    floats = rng.choice([0.0, -0.0, 1.0, 2.5, -3.0, 1e20, np.inf, -np.inf, np.nan, 1 / 3], N)
    words = rng.choice(["yes", " no ", "", "maybe", "ünï", "=1+1", None], N)
    mixed = pd.Series(rng.choice(np.array([1, 1.0, "1", " 1", None, True, 2], dtype=object), N))
    return {
        "floats": pd.Series(floats),
        "ints": pd.Series(rng.integers(-3, 4, N)),
        "nullable": pd.Series(pd.array(rng.integers(0, 3, N), dtype="Int64")).where(
            rng.random(N) > 0.1
        ),
        "words": pd.Series(words, dtype=object),
        "text": pd.Series(words).astype("str"),
        "mixed": mixed,
        "bools": pd.Series(rng.random(N) > 0.5),
    }


@pytest.mark.parametrize("column", list(_columns(np.random.default_rng(0))))
def test_label_strings_equal_the_row_by_row_rule(column: str) -> None:
    values = _columns(np.random.default_rng(1))[column]
    assert label_strings(values).tolist() == _label_strings_row_by_row(values)


def test_row_ids_are_positions_as_text_or_the_id_column() -> None:
    frame = pd.DataFrame({"code": [f"r{i}" for i in range(N)]})
    assert row_ids(frame, None).tolist() == [str(i) for i in range(N)]
    assert row_ids(frame, "code").tolist() == frame["code"].tolist()


def _groups_row_by_row(frame: pd.DataFrame, labels: list[str | None]) -> list[list[int]]:
    """Rows keyed by the repr of every value (missing equal to missing), labelled rows only;
    groups of two or more with more than one label, in order of their first row."""
    by_value: dict[tuple, list[int]] = {}
    for i, row in enumerate(frame.itertuples(index=False)):
        if labels[i] is None:
            continue
        key = tuple("\0missing" if pd.isna(v) else repr(v) for v in row)
        by_value.setdefault(key, []).append(i)
    groups = [g for g in by_value.values() if len(g) > 1 and len({labels[r] for r in g}) > 1]
    return sorted(groups, key=lambda g: g[0])


def test_duplicate_groups_equal_a_row_by_row_grouping() -> None:
    rng = np.random.default_rng(2)
    frame = pd.DataFrame(
        {
            "x": rng.normal(size=N),
            "level": rng.choice(["a", "b", None], N),
            "count": rng.integers(0, 5, N).astype(float),
        }
    )
    # Copy 3,000 rows over others, some with missing values, so groups of several form.
    src = rng.integers(0, N, 3000)
    dst = rng.integers(0, N, 3000)
    frame.iloc[dst] = frame.iloc[src].to_numpy()
    frame.loc[rng.random(N) < 0.01, "x"] = np.nan
    labels = rng.choice(np.array(["p", "q", None], dtype=object), N, p=[0.6, 0.3, 0.1])
    roles = ColumnRoles(label="y", id=None, numeric=["x", "count"], categorical=["level"])
    got = conflicting_duplicates(frame, roles, labels)
    expected = _groups_row_by_row(frame[["x", "count", "level"]], list(labels))
    assert len(expected) > 100  # the copies made real groups
    assert got == expected
