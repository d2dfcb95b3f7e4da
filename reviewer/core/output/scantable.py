"""The scan table written to a file: CSV, or Parquet when the name ends in .parquet.

Values are written exactly as they are (the table feeds pipelines). The write is atomic,
and never lands on an input file, whatever name reaches it (symbolic or hard link).
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from pathlib import Path
from typing import Any, BinaryIO

import pandas as pd

from reviewer.core.output.atomic import atomic_write, check_target
from reviewer.core.output.fastcsv import write_csv

PARQUET_SUFFIXES = (".parquet", ".pq")


def check_scan_target(out: str | os.PathLike[str], *, protect: Iterable[Path] = ()) -> Path:
    """Refuse a bad output path before the work starts (an input, a folder, no such folder)."""
    from reviewer.core.errors import ExportError
    from reviewer.core.output.atomic import same_file

    for source in protect:
        if same_file(Path(os.path.abspath(os.fspath(out))), Path(source)):
            raise ExportError(
                f"refusing to write the output onto the source data file {source}; "
                "choose another file name"
            )
    path = check_target(out, overwrite=True, protect=protect)
    if not path.parent.is_dir():
        from reviewer.core.errors import ExportError

        raise ExportError(f"Cannot write {path}: folder {path.parent} does not exist")
    return path


def write_scan_table(
    table: pd.DataFrame, out: str | os.PathLike[str], *, protect: Iterable[Path] = ()
) -> Path:
    """Write ``table`` to ``out`` (replacing an earlier output; never a file in ``protect``)."""
    parquet = str(out).lower().endswith(PARQUET_SUFFIXES)

    def write(stream: BinaryIO) -> None:
        if parquet:
            table.to_parquet(stream, index=False)
        else:
            write_csv(table, stream)

    return atomic_write(out, write, overwrite=True, protect=protect)


def write_scan_stream(table: pd.DataFrame, stream: Any) -> None:
    """The scan table as CSV on an open stream (standard output): its bytes where it has a
    binary buffer, else text."""
    binary = getattr(stream, "buffer", None)
    if binary is None:
        stream.write(table.to_csv(index=False))
        return
    stream.flush()
    write_csv(table, binary)
    binary.flush()


def write_text(
    out: str | os.PathLike[str], text: str, *, protect: Iterable[str | os.PathLike[str]] = ()
) -> Path:
    """A small text result (a run summary, a probe report as JSON), written atomically;
    never onto a file in ``protect``."""
    return atomic_write(
        out,
        lambda stream: stream.write(text.encode("utf-8")),
        overwrite=True,
        protect=[Path(p) for p in protect],
    )
