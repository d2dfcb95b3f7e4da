"""Column roles: each kind of column is classified with a reason, and bad choices are refused."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reviewer.core.data.roles import ColumnRoles, guess_id_column, guess_label_column, infer_roles
from reviewer.core.errors import InputError

N = 40


@pytest.fixture
def frame() -> pd.DataFrame:
    rng = np.random.default_rng(0)
    words = ["alpha", "beta", "gamma", "delta", "epsilon"]
    return pd.DataFrame(
        {
            "code": [f"K{i:04d}" for i in range(N)],
            "seq": np.arange(N),
            "height": rng.normal(size=N),
            "count_text": [str(i % 7) for i in range(N)],  # numbers stored as text
            "colour": rng.choice(["red", "green", "blue"], N),
            "comment": [" ".join(rng.choice(words, 6)) + f" {i}" for i in range(N)],
            "tag": [f"t{i}x" for i in range(N)],
            "fixed": ["same"] * N,
            "blank": [np.nan] * N,
            "when": [f"2025-03-{1 + i % 28:02d}" for i in range(N)],
            "label": rng.choice(["a", "b"], N),
        }
    )


def test_each_column_kind_with_a_reason(frame: pd.DataFrame) -> None:
    roles = infer_roles(frame, "label", "code")
    assert roles.label == "label" and roles.id == "code"
    assert set(roles.numeric) == {"height", "count_text"}
    assert roles.categorical == ["colour"]
    reasons = roles.ignored
    assert "identifier" in reasons["seq"]
    assert roles.text == ["comment"]  # free text becomes TF-IDF features
    assert "identifier" in reasons["tag"]
    assert reasons["fixed"] == "constant"
    assert reasons["blank"] == "all values missing"
    assert "date" in reasons["when"]
    assert "label" not in roles.features and "code" not in roles.features
    assert all(reasons.values())  # every ignored column says why


def test_iso_date_times_and_real_datetimes_are_ignored() -> None:
    frame = pd.DataFrame(
        {
            "stamp": [f"2024-01-{d:02d}T10:15:00Z" for d in range(1, 11)],
            "parsed": pd.date_range("2024-01-01", periods=10),
            "x": np.arange(10.0) % 3,
            "label": ["a", "b"] * 5,
        }
    )
    roles = infer_roles(frame, "label")
    assert "date" in roles.ignored["stamp"] and "date" in roles.ignored["parsed"]
    assert roles.numeric == ["x"]


def test_overrides_are_respected(frame: pd.DataFrame) -> None:
    roles = infer_roles(
        frame,
        "label",
        "code",
        overrides={"count_text": "categorical", "height": "ignore", "seq": "numeric"},
    )
    assert "count_text" in roles.categorical
    assert roles.ignored["height"] == "ignored by choice"
    assert "seq" in roles.numeric
    assert ColumnRoles.from_dict(roles.to_dict()) == roles


def test_bad_overrides_are_refused(frame: pd.DataFrame) -> None:
    with pytest.raises(InputError, match="'nope'"):
        infer_roles(frame, "label", overrides={"nope": "numeric"})
    with pytest.raises(InputError, match=r"'height'.*'words'.*numeric, categorical, text"):
        infer_roles(frame, "label", overrides={"height": "words"})


def test_missing_label_column_lists_the_columns(frame: pd.DataFrame) -> None:
    with pytest.raises(InputError, match=r"label column 'grade' not found.*'code'.*'height'"):
        infer_roles(frame, "grade")


def test_missing_id_column_lists_the_columns(frame: pd.DataFrame) -> None:
    with pytest.raises(InputError, match=r"id column 'lot' not found.*'code'.*'label'"):
        infer_roles(frame, "label", "lot")


def test_duplicate_ids_name_the_column_and_a_value(frame: pd.DataFrame) -> None:
    frame.loc[5, "code"] = "K0002"
    with pytest.raises(InputError, match=r"'code'.*duplicate.*'K0002'"):
        infer_roles(frame, "label", "code")


def test_empty_id_is_refused(frame: pd.DataFrame) -> None:
    frame.loc[4, "code"] = None
    with pytest.raises(InputError, match=r"'code'.*empty"):
        infer_roles(frame, "label", "code")


def test_label_cannot_be_the_id(frame: pd.DataFrame) -> None:
    with pytest.raises(InputError, match="both the label and the id"):
        infer_roles(frame, "label", "label")


def test_no_usable_feature_says_why() -> None:
    frame = pd.DataFrame({"fixed": ["k"] * 5, "blank": [None] * 5, "label": list("ababa")})
    with pytest.raises(InputError, match=r"no usable feature.*fixed: constant.*blank: all values"):
        infer_roles(frame, "label")


def test_guesses(frame: pd.DataFrame) -> None:
    assert guess_label_column(frame) == "label"
    assert guess_id_column(frame, "label") == "code"
