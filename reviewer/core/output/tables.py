"""Cleaned Parquet and Excel tables: the source read again, labels replaced, rows dropped.

Parquet keeps the Arrow schema and per-column compression; Excel writes the data sheet
only, values only (other sheets and formatting are not carried over).
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Any, BinaryIO

import numpy as np
import pandas as pd

from reviewer.core.data.loading import SourceInfo
from reviewer.core.errors import ExportError
from reviewer.core.output.atomic import atomic_write

__all__ = ["changed_rows", "cleaned_excel", "cleaned_parquet", "text_or_none"]


def text_or_none(value: Any) -> str | None:
    """A label as text, None for any missing value (None, NaN, pandas NA/NaT)."""
    if type(value) is str:  # the common case, first: this runs once per row
        return value
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value if isinstance(value, str) else str(value)


def changed_rows(
    new: list[str | None], old: list[str | None] | None, loaded: list[Any]
) -> list[int]:
    """Rows whose new label differs from the source label (or, without it, the loaded text)."""
    base = old if old is not None else [text_or_none(v) for v in loaded]
    return [i for i, (a, b) in enumerate(zip(new, base, strict=True)) if a != b]


def cleaned_parquet(
    source: SourceInfo,
    label_column: str,
    new: list[str | None],
    old: list[str | None] | None,
    excluded: np.ndarray,
    keep_excluded: bool,
    flag_column: str,
    out_path: str | os.PathLike[str],
    overwrite: bool,
) -> Path:
    """Write the Parquet source with new labels; excluded rows dropped or flagged."""
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    where = Path(source.path)
    try:
        pfile = pq.ParquetFile(where)
        table = pfile.read()
    except Exception as exc:
        raise ExportError(f"Cannot read the source {where}: {exc}") from exc
    if table.num_rows != source.n_rows or label_column not in table.column_names:
        raise ExportError(
            f"Cannot export {where}: it now has {table.num_rows} rows and columns "
            f"{table.column_names}; the file may have changed since it was loaded"
        )
    compression = _parquet_compression(pfile)
    idx = table.column_names.index(label_column)
    field = table.schema.field(idx)
    column = table.column(idx).combine_chunks()
    loaded = column.to_pylist()
    changed = changed_rows(new, old, loaded)
    if changed:
        values = [_arrow_cast(new[i], field.type, label_column, where) for i in changed]
        mask = np.zeros(len(loaded), dtype=bool)
        mask[changed] = True
        try:
            column = pc.replace_with_mask(column, pa.array(mask), pa.array(values, field.type))
        except (pa.ArrowNotImplementedError, pa.ArrowInvalid, pa.ArrowTypeError):
            for i, v in zip(changed, values, strict=True):
                loaded[i] = v
            column = pa.array(loaded, type=field.type)
        table = table.set_column(idx, field, column)
    if keep_excluded:
        table = table.append_column(pa.field(flag_column, pa.bool_()), pa.array(excluded))
        if isinstance(compression, dict):
            compression[flag_column] = compression.get(label_column, "snappy")
    else:
        table = table.filter(pa.array(~excluded))

    def write(stream: BinaryIO) -> None:
        pq.write_table(table, stream, compression=compression)

    return atomic_write(out_path, write, overwrite=overwrite, protect=(where,))


def _parquet_compression(pfile: Any) -> dict[str, str] | str:
    meta = pfile.metadata
    if meta.num_row_groups == 0:
        return "snappy"
    group = meta.row_group(0)
    codecs_by_col = {}
    for j in range(group.num_columns):
        chunk = group.column(j)
        codecs_by_col[chunk.path_in_schema] = chunk.compression.lower()
    return codecs_by_col


def _arrow_cast(value: str | None, typ: Any, column: str, where: Path) -> Any:
    import pyarrow as pa

    if value is None:
        return None
    try:
        return pa.array([value], pa.string()).cast(typ)[0].as_py()
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError):
        pass
    if pa.types.is_integer(typ):
        try:
            number = float(value)
            if number.is_integer():
                return pa.array([int(number)], typ)[0].as_py()
        except (ValueError, OverflowError, pa.ArrowInvalid):
            pass
    raise ExportError(
        f"Cannot export {where}: label {value!r} does not fit column {column!r} of type {typ}"
    )


# -- Excel ---------------------------------------------------------------------------------


def cleaned_excel(
    source: SourceInfo,
    label_column: str,
    new: list[str | None],
    old: list[str | None] | None,
    excluded: np.ndarray,
    keep_excluded: bool,
    flag_column: str,
    out_path: str | os.PathLike[str],
    overwrite: bool,
) -> Path:
    """Write the Excel source's data sheet with new labels; excluded rows dropped or flagged."""
    where = Path(source.path)
    try:
        with pd.ExcelFile(where, engine="openpyxl") as book:
            sheet = source.sheet if source.sheet is not None else book.sheet_names[0]
            frame = pd.read_excel(book, sheet_name=sheet)
    except Exception as exc:
        raise ExportError(f"Cannot read the source {where}: {exc}") from exc
    if len(frame) != source.n_rows or label_column not in frame.columns:
        raise ExportError(
            f"Cannot export {where}: sheet {sheet!r} now has {len(frame)} rows and columns "
            f"{list(frame.columns)}; the file may have changed since it was loaded"
        )
    series = frame[label_column]
    loaded = series.tolist()
    changed = changed_rows(new, old, loaded)
    if changed:
        values = [_like(new[i], series.dtype, loaded[i], label_column, where) for i in changed]
        if series.dtype.kind in "iub" and any(v is None for v in values):
            raise ExportError(
                f"Cannot export {where}: column {label_column!r} has no missing values "
                "and cannot hold an empty label"
            )
        column = series.copy()
        if column.dtype == object:
            for i, v in zip(changed, values, strict=True):
                column.iat[i] = v
        else:
            column.iloc[changed] = values
        frame[label_column] = column
    if keep_excluded:
        frame[flag_column] = excluded
    else:
        frame = frame.loc[~excluded]

    def write(stream: BinaryIO) -> None:
        with pd.ExcelWriter(stream, engine="openpyxl") as writer:
            frame.to_excel(writer, sheet_name=str(sheet), index=False)

    return atomic_write(out_path, write, overwrite=overwrite, protect=(where,))


def _like(value: str | None, dtype: Any, cell: Any, column: str, where: Path) -> Any:
    """The new label as the kind of value the column (or, for mixed columns, the cell) holds."""
    if value is None:
        return None
    kind = getattr(dtype, "kind", "O")
    try:
        if kind in "iu":
            number = float(value)
            if not number.is_integer():
                raise ValueError(value)
            return int(number)
        if kind == "f":
            return float(value)
        if kind == "b":
            lowered = value.strip().lower()
            if lowered in ("true", "1"):
                return True
            if lowered in ("false", "0"):
                return False
            raise ValueError(value)
        if kind == "M":
            return pd.Timestamp(value)
    except (ValueError, TypeError) as exc:
        raise ExportError(
            f"Cannot export {where}: label {value!r} does not fit column {column!r} of type {dtype}"
        ) from exc
    # A mixed column: a cell that held a number keeps holding one when the label is numeric.
    if isinstance(cell, (bool, np.bool_)):
        return value
    if isinstance(cell, (int, np.integer)):
        try:
            return int(value)
        except ValueError:
            return value
    if isinstance(cell, (float, np.floating)) and not math.isnan(cell):
        try:
            return float(value)
        except ValueError:
            return value
    return value
