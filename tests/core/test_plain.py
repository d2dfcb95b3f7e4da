"""plain(): every value the core hands to json.dumps comes out in JSON's own types."""

from __future__ import annotations

import datetime as dt
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.core.plain import plain


def test_numpy_scalars_become_python_numbers():
    assert plain(np.int64(7)) == 7 and type(plain(np.int64(7))) is int
    assert type(plain(np.float32(0.5))) is float
    # np.bool_ must stay a bool, not turn into 1.
    assert plain(np.bool_(True)) is True
    assert plain(np.str_("cat")) == "cat"


@pytest.mark.parametrize("bad", [float("nan"), float("inf"), -math.inf, np.float64("nan")])
def test_non_finite_floats_become_none(bad):
    assert plain(bad) is None
    assert plain([1.5, bad]) == [1.5, None]


def test_missing_markers_of_pandas_become_none():
    assert plain(pd.NA) is None and plain(pd.NaT) is None


def test_containers_keys_tuples_paths_and_dates():
    value = {
        1: (np.int64(2), Path("/tmp/x.csv")),
        ("a", "b"): np.array([1.0, np.nan]),
        "when": dt.datetime(2025, 1, 2, 3, 4, 5, tzinfo=dt.timezone.utc),
        "set": {3, 1, 2},
    }
    out = plain(value)
    assert out == {
        "1": [2, "/tmp/x.csv"],
        "('a', 'b')": [1.0, None],
        "when": "2025-01-02T03:04:05+00:00",
        "set": [1, 2, 3],
    }
    # The point of it all: strict JSON (no NaN tokens) accepts the result.
    assert json.loads(json.dumps(out, allow_nan=False)) == out


def test_plain_values_pass_through_unchanged():
    for value in ("x", 3, 2.5, True, False, None, [], {}):
        assert plain(value) == value and type(plain(value)) is type(value)
