"""The Python API for notebooks and pipelines: `scan` and `probe` a table in one call.

``data`` is a pandas DataFrame or the path of a CSV, TSV, Parquet or Excel file. Arguments
are checked here, once, and a bad one raises the project's own error naming it
(`SettingsError` for settings, `InputError` for data). For a review with decisions, undo
and export, use `reviewer.ReviewSession`.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from numbers import Real
from pathlib import Path
from typing import Any, TypeAlias

import pandas as pd

from reviewer.core import door
from reviewer.core.errors import InputError, SettingsError
from reviewer.core.values import KERNELS, FitSettings

__all__ = ["probe", "scan"]

Data: TypeAlias = "pd.DataFrame | str | os.PathLike[str]"
Progress: TypeAlias = Callable[[float, str], None]


def scan(
    data: Data,
    label: str,
    *,
    id: str | None = None,
    kernel: str = "auto",
    C: float | None = None,
    gamma: float | str = "scale",
    folds: int = 5,
    seed: int = 0,
    roles: Mapping[str, str] | None = None,
    vectors: door.Vectors | None = None,
    progress: Progress | None = None,
) -> pd.DataFrame:
    """Rank every row of ``data`` by how strongly a soft-margin model disagrees with its label.

    Returns the same columns, in the same order, as ``margin-reviewer scan`` writes
    (``row_id, label, model_label, margin, slack, heldout_margin, heldout_slack, alpha,
    zone, support, score, rank``), one row per input row in input order; a DataFrame keeps
    its index. ``roles`` maps a column to ``numeric``, ``categorical``, ``text``,
    ``vector`` or ``ignore``; ``vectors`` (a ``.npy`` file or a numpy array of shape
    (rows, d), in row order) adds one feature per element; ``progress(fraction, message)``
    is called during the work. The ranking suggests; a
    person decides.
    """
    settings = _settings("scan", kernel=kernel, C=C, gamma=gamma, folds=folds, seed=seed)
    loaded, index = _load("scan", data)
    _check_columns("scan", loaded.frame, label, id, roles)
    outcome = door.scan_loaded(
        loaded,
        label,
        id_column=id,
        settings=settings,
        overrides=dict(roles or {}),
        vectors=_vectors("scan", vectors),
        progress=_progress("scan", progress),
    )
    table = outcome.table
    if index is not None:
        table.index = index
    return table


def probe(
    data: Data,
    label: str,
    *,
    id: str | None = None,
    rate: float = 0.05,
    kernel: str = "auto",
    C: float | None = None,
    gamma: float | str = "scale",
    folds: int = 5,
    seed: int = 0,
    roles: Mapping[str, str] | None = None,
    vectors: door.Vectors | None = None,
    progress: Progress | None = None,
) -> door.ProbeResult:
    """Plant ``rate`` label flips in a copy of ``data`` and measure how many the ranking finds.

    The result has ``top`` (recall at the top 5/10/20% of the ranking), ``auroc``,
    ``average_precision``, the planted rows and ``to_dict()`` for JSON. It measures the
    recovery of planted flips, not of the errors already in the data.
    """
    settings = _settings("probe", kernel=kernel, C=C, gamma=gamma, folds=folds, seed=seed)
    if not isinstance(rate, Real) or isinstance(rate, bool) or not 0 < float(rate) < 0.5:
        raise SettingsError(
            f"probe(): argument 'rate' must be a number above 0 and below 0.5, got {rate!r}"
        )
    loaded, _ = _load("probe", data)
    _check_columns("probe", loaded.frame, label, id, roles)
    return door.probe_loaded(
        loaded,
        label,
        id_column=id,
        settings=settings,
        rate=float(rate),
        seed=seed,
        overrides=dict(roles or {}),
        vectors=_vectors("probe", vectors),
        progress=_progress("probe", progress),
    )


# ---- checks at the boundary ----------------------------------------------------------------
def _settings(fn: str, *, kernel: Any, C: Any, gamma: Any, folds: Any, seed: Any) -> FitSettings:
    if kernel not in ("auto", *KERNELS):
        raise SettingsError(
            f"{fn}(): argument 'kernel' must be one of auto, {', '.join(KERNELS)}; got {kernel!r}"
        )
    if C is not None and (isinstance(C, bool) or not isinstance(C, Real) or not float(C) > 0):
        raise SettingsError(f"{fn}(): argument 'C' must be a positive number or None, got {C!r}")
    if not (gamma == "scale" or (isinstance(gamma, Real) and not isinstance(gamma, bool))):
        raise SettingsError(f"{fn}(): argument 'gamma' must be a number or 'scale', got {gamma!r}")
    for name, value in (("folds", folds), ("seed", seed)):
        if isinstance(value, bool) or not isinstance(value, int):
            raise SettingsError(f"{fn}(): argument {name!r} must be a whole number, got {value!r}")
    try:
        return FitSettings(
            kernel=kernel,
            C=None if C is None else float(C),
            gamma=gamma if gamma == "scale" else float(gamma),
            folds=folds,
            seed=seed,
        ).validate()
    except SettingsError as exc:
        raise SettingsError(f"{fn}(): {exc}") from None


def _load(fn: str, data: Any) -> tuple[door.LoadedTable, pd.Index | None]:
    if isinstance(data, pd.DataFrame):
        return door.table_from_frame(data), data.index
    if isinstance(data, (str, os.PathLike)):
        return door.load_table(Path(data)), None
    raise InputError(
        f"{fn}(): argument 'data' must be a pandas DataFrame or a file path, "
        f"got {type(data).__name__}"
    )


def _check_columns(
    fn: str, frame: pd.DataFrame, label: Any, id_column: Any, roles: Mapping[str, str] | None
) -> None:
    columns = list(frame.columns)
    shown = ", ".join(map(repr, columns[:12])) + (" ..." if len(columns) > 12 else "")
    if not isinstance(label, str) or label not in columns:
        raise InputError(f"{fn}(): argument 'label' must name a column ({shown}); got {label!r}")
    if id_column is not None and (not isinstance(id_column, str) or id_column not in columns):
        raise InputError(f"{fn}(): argument 'id' must name a column ({shown}); got {id_column!r}")
    if roles is not None and not isinstance(roles, Mapping):
        raise InputError(
            f"{fn}(): argument 'roles' must map column names to kinds, got {type(roles).__name__}"
        )


def _vectors(fn: str, vectors: Any) -> door.Vectors | None:
    import numpy as np

    if vectors is None or isinstance(vectors, (str, os.PathLike, np.ndarray)):
        return vectors
    raise InputError(
        f"{fn}(): argument 'vectors' must be a .npy file path or a numpy array of shape "
        f"(rows, d), got {type(vectors).__name__}"
    )


def _progress(fn: str, progress: Any) -> Progress | None:
    if progress is not None and not callable(progress):
        raise SettingsError(
            f"{fn}(): argument 'progress' must be a function (fraction, message), got "
            f"{type(progress).__name__}"
        )
    return progress
