"""The cleaned table, in the source's own format: checks first, then one writer per format.

Every writer goes through reviewer.core.output.atomic, so a cleaned file is complete or
absent, never half written, and never lands on the source data file.
"""

from __future__ import annotations

import io
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from reviewer.core.data.loading import SourceInfo
from reviewer.core.errors import ExportError
from reviewer.core.output.atomic import atomic_write_bytes, check_target
from reviewer.core.output.delimited import cleaned_delimited
from reviewer.core.output.tables import cleaned_excel, cleaned_parquet, text_or_none

__all__ = ["export_cleaned"]


def compress(data: bytes, compression: str, name: str) -> bytes:
    """``data`` compressed as ``compression`` (gzip, bz2, xz, or a one-file zip)."""
    import bz2
    import gzip
    import lzma
    import zipfile

    if compression == "gzip":
        return gzip.compress(data, mtime=0)
    if compression == "bz2":
        return bz2.compress(data)
    if compression == "xz":
        return lzma.compress(data)
    buffer = io.BytesIO()
    member = name[: -len(".zip")] if name.lower().endswith(".zip") else name
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr(member, data)
    return buffer.getvalue()


def export_cleaned(
    source: SourceInfo,
    label_column: str,
    labels: Sequence[str | None],
    excluded: np.ndarray,
    out_path: str | os.PathLike[str],
    *,
    source_labels: Sequence[Any] | None = None,
    keep_excluded: bool = False,
    flag_column: str = "review_excluded",
    overwrite: bool = False,
) -> Path:
    """Write the cleaned table to ``out_path`` in the source's own format; return the path.

    ``labels[i]`` and ``excluded[i]`` belong to data row i (0-based, header excluded).
    A row's label is rewritten only where ``labels[i]`` differs from ``source_labels[i]``
    (the labels as loaded; pass them: it keeps untouched rows byte-identical even when the
    loader reformatted a value, e.g. "01" read as 1). Without ``source_labels`` a delimited
    row is compared with its field's own unquoted text, and a Parquet/Excel row with the
    loaded value's text. None means a missing label (an empty field / null cell).

    Excluded rows are dropped, or with ``keep_excluded`` kept and marked true in an added
    last column ``flag_column``. Delimited output keeps a changed field's quoting if it was
    quoted, and otherwise quotes the new label only when it needs it. Parquet keeps the
    Arrow schema and per-column compression; Excel writes the data sheet only, values only
    (other sheets and formatting are not carried over).
    Raises ExportError (nothing written) on any mismatch with ``source`` or write failure.
    """
    src_path = Path(source.path)
    n = int(source.n_rows)
    excluded = np.asarray(excluded, dtype=bool).reshape(-1)
    if len(labels) != n or excluded.shape[0] != n:
        raise ExportError(
            f"Cannot export {src_path}: it has {n} data rows but {len(labels)} labels "
            f"and {excluded.shape[0]} exclusion flags were given"
        )
    if source_labels is not None and len(source_labels) != n:
        raise ExportError(
            f"Cannot export {src_path}: {len(source_labels)} source labels for {n} rows"
        )
    if label_column not in source.columns:
        raise ExportError(f"Cannot export {src_path}: no label column {label_column!r}")
    if keep_excluded and flag_column in source.columns:
        raise ExportError(
            f"Cannot export {src_path}: the flag column {flag_column!r} already exists; "
            "choose another name"
        )
    # Fail before reading a large file if the target is plainly unusable.
    check_target(out_path, overwrite=overwrite, protect=(src_path,))
    new = [text_or_none(v) for v in labels]
    old = None if source_labels is None else [text_or_none(v) for v in source_labels]

    kind = source.kind
    if kind == "delimited":
        data = cleaned_delimited(
            source, label_column, new, old, excluded, keep_excluded, flag_column
        )
        if source.compression:  # written back compressed the same way
            data = compress(data, source.compression, Path(out_path).name)
        return atomic_write_bytes(out_path, data, overwrite=overwrite, protect=(src_path,))
    writer = {"parquet": cleaned_parquet, "excel": cleaned_excel}.get(kind)
    if writer is not None:
        return writer(
            source,
            label_column,
            new,
            old,
            excluded,
            keep_excluded,
            flag_column,
            out_path,
            overwrite,
        )
    raise ExportError(f"Cannot export {src_path}: unknown source kind {kind!r}")
