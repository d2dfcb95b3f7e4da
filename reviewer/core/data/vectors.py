"""Vectors as features: a column holding a list of numbers per row (an embedding, say), or a
``.npy`` file of shape (rows, d) matched to the table by row order.

Each becomes a dense block of d features, standardised like numeric columns. Every check
fails with one message naming the column or file and the rows at fault.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

from reviewer.core.data.loading import sha256_of
from reviewer.core.errors import InputError

VECTORS_FILE_NAME = "vectors"
"""Feature names of a vectors file: vectors[0], vectors[1], ..."""


def _rows(positions: np.ndarray | list[int], limit: int = 5) -> str:
    shown = ", ".join(str(int(r)) for r in list(positions)[:limit])
    more = len(positions) - limit
    return shown + (f" and {more:,} more" if more > 0 else "")


def column_vectors(values: pd.Series, column: str) -> np.ndarray:
    """A list-per-row column as an (n, d) float64 array; ragged lengths, missing vectors,
    values that are not numbers, NaN or infinity raise InputError naming the rows."""
    cells = values.tolist()
    missing = [i for i, v in enumerate(cells) if v is None or (np.isscalar(v) and pd.isna(v))]
    if missing:
        raise InputError(
            f"vector column {column!r}: row(s) {_rows(missing)} have no vector "
            f"({len(missing):,} of {len(cells):,}); every row needs one"
        )
    lengths = np.empty(len(cells), dtype=np.int64)
    for i, v in enumerate(cells):
        if isinstance(v, (str, bytes, dict)) or not hasattr(v, "__len__"):
            raise InputError(
                f"vector column {column!r}: row {i} holds {type(v).__name__} {str(v)[:40]!r}, "
                "not a list of numbers"
            )
        lengths[i] = len(v)
    usual = int(np.bincount(lengths).argmax())
    odd = np.flatnonzero(lengths != usual)
    if len(odd):
        found = ", ".join(f"row {int(r)} has {int(lengths[r])}" for r in odd[:5])
        raise InputError(
            f"vector column {column!r} is ragged: most rows have {usual} numbers but {found}"
            + (f" ({len(odd):,} rows differ)" if len(odd) > 5 else "")
        )
    if usual == 0:
        raise InputError(f"vector column {column!r}: every vector is empty")
    try:
        arr = np.array([np.asarray(v) for v in cells])
        if not (np.issubdtype(arr.dtype, np.number) or np.issubdtype(arr.dtype, np.bool_)):
            raise ValueError(str(arr.dtype))
        arr = arr.astype(np.float64)
    except (ValueError, TypeError):
        bad = next((i for i, v in enumerate(cells) if not _numeric(np.asarray(v, dtype=object))), 0)
        raise InputError(
            f"vector column {column!r}: row {bad} holds values that are not numbers "
            f"({str(cells[bad])[:60]})"
        ) from None
    if arr.ndim != 2:
        raise InputError(
            f"vector column {column!r}: each row must hold a flat list of numbers, not nested lists"
        )
    _check_finite(arr, f"vector column {column!r}")
    return arr


def _numeric(values: np.ndarray) -> bool:
    try:
        values.astype(np.float64)
    except (ValueError, TypeError):
        return False
    return values.ndim == 1


def _check_finite(arr: np.ndarray, what: str) -> None:
    bad = ~np.isfinite(arr)
    if bad.any():
        rows = np.flatnonzero(bad.any(axis=1))
        kind = "NaN" if np.isnan(arr[bad]).any() else "infinity"
        raise InputError(
            f"{what}: {kind} inside the vectors of row(s) {_rows(rows)} "
            f"({len(rows):,} rows); every element must be a finite number"
        )


def load_vectors_file(path: str | os.PathLike[str], n_rows: int) -> tuple[np.ndarray, str]:
    """(vectors as (n_rows, d) float64, SHA-256 of the file) from a ``.npy`` file; one
    InputError naming the file for anything else (wrong shape or row count, not numbers,
    NaN or infinity, not a .npy file)."""
    p = Path(path).expanduser()
    if not p.exists():
        raise InputError(f"{p}: vectors file not found")
    if p.is_dir():
        raise InputError(f"{p}: is a folder, not a .npy vectors file")
    with open(p, "rb") as handle:
        magic = handle.read(6)
    if magic != b"\x93NUMPY":  # the .npy format's magic string (numpy's format spec)
        raise InputError(f"{p}: not a .npy file (save one (rows, d) array with numpy.save)")
    try:
        arr = np.load(p, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        first = (str(exc).strip().splitlines() or [type(exc).__name__])[0][:160]
        raise InputError(f"{p}: not a readable .npy array file ({first})") from exc
    if not isinstance(arr, np.ndarray):  # an .npz archive
        raise InputError(f"{p}: holds several arrays (.npz); save one (rows, d) array with .npy")
    if arr.ndim != 2:
        raise InputError(
            f"{p}: vectors must be a 2-D array (rows, d); this one has shape {arr.shape}"
        )
    if not (np.issubdtype(arr.dtype, np.number) or np.issubdtype(arr.dtype, np.bool_)):
        raise InputError(f"{p}: vectors must be numbers; this array holds {arr.dtype}")
    if np.iscomplexobj(arr):
        raise InputError(f"{p}: vectors must be real numbers; this array is complex")
    if arr.shape[0] != n_rows:
        raise InputError(
            f"{p}: has {arr.shape[0]:,} vectors but the table has {n_rows:,} rows; "
            "they are matched by row order, one per row"
        )
    if arr.shape[1] == 0:
        raise InputError(f"{p}: the vectors have no elements (shape {arr.shape})")
    arr = np.asarray(arr, dtype=np.float64)
    _check_finite(arr, str(p))
    return arr, sha256_of(p)


def standardise(block: np.ndarray) -> np.ndarray:
    """Each element to mean 0 and unit variance (a constant element becomes 0), as the
    numeric columns are scaled."""
    from sklearn.preprocessing import StandardScaler

    out: np.ndarray = StandardScaler().fit_transform(block)
    return out
