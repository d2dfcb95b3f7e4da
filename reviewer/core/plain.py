"""One way to make a value JSON-plain: what json.dumps(..., allow_nan=False) accepts.

numpy scalars and arrays become Python numbers and lists; non-finite floats (NaN, +-inf),
pandas' NA and NaT become None; mapping keys become text; tuples become lists and sets
sorted lists; paths become text and dates ISO 8601 text. Anything else is returned as is.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping
from pathlib import PurePath
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["plain"]


def plain(value: Any) -> Any:
    """``value`` with every part turned into str, int, float, bool, None, list or dict."""
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        return plain(value.item())
    if value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, int):
        return int(value)  # bool was returned above; IntEnum and friends become plain int
    if isinstance(value, (dt.datetime, dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, PurePath):
        return str(value)
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, (set, frozenset)):
        items = [plain(v) for v in value]
        try:
            return sorted(items)  # a set has no order; a sorted list reads the same every time
        except TypeError:
            return items
    return value
