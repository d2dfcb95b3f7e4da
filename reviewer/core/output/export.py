"""Export: the cleaned table in the source's own format, the audit log, the HTML summary.

Every writer here goes through reviewer.core.output.atomic, so an export is complete or absent,
never half written, and never lands on the source data file.

Cleaned delimited text is rebuilt from the source bytes, not re-serialised: the file is
split into records and fields by hand (quotes, doubled quotes, embedded line breaks,
CRLF / LF / CR) and only the text of a changed label field is replaced. Delimiter,
encoding, byte-order mark, line endings, quoting and every other byte stay as they were.
"""

from __future__ import annotations

import base64
import codecs
import csv
import datetime as dt
import html
import io
import json
import math
import os
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any, Protocol

import numpy as np
import pandas as pd

from reviewer.core.errors import ExportError
from reviewer.core.output.atomic import atomic_write, atomic_write_bytes, check_target

__all__ = [
    "AUDIT_COLUMNS",
    "export_cleaned",
    "write_audit_csv",
    "write_audit_jsonl",
    "write_summary_html",
]

#: Audit columns in the order they are written; keys beyond these follow, sorted.
AUDIT_COLUMNS: tuple[str, ...] = (
    "seq",
    "time",
    "reviewer",
    "action",
    "rows",
    "row_ids",
    "before",
    "after",
    "slack",
    "zone",
    "reason",
    "note",
    "target",
)

# pandas' default na_values (listed in its read_csv documentation): a field holding one of
# these was read as a missing label, so a None label there is no change.
_NA_TEXT = frozenset(
    [
        "",
        "#N/A",
        "#N/A N/A",
        "#NA",
        "-1.#IND",
        "-1.#QNAN",
        "-NaN",
        "-nan",
        "1.#IND",
        "1.#QNAN",
        "<NA>",
        "N/A",
        "NA",
        "NULL",
        "NaN",
        "None",
        "n/a",
        "nan",
        "null",
    ]
)


class SourceLike(Protocol):
    """The attributes of reviewer.core.data.loading.SourceInfo that export uses."""

    path: Path
    kind: str
    sha256: str
    delimiter: str | None
    encoding: str | None
    sheet: str | None
    n_rows: int
    columns: tuple[str, ...]


# ----------------------------------------------------------------------------------------
# Cleaned table
# ----------------------------------------------------------------------------------------


def export_cleaned(
    source: SourceLike,
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
    new = [_text_or_none(v) for v in labels]
    old = None if source_labels is None else [_text_or_none(v) for v in source_labels]

    kind = source.kind
    if kind == "delimited":
        data = _cleaned_delimited(
            source, label_column, new, old, excluded, keep_excluded, flag_column
        )
        return atomic_write_bytes(out_path, data, overwrite=overwrite, protect=(src_path,))
    writer = {"parquet": _cleaned_parquet, "excel": _cleaned_excel}.get(kind)
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


def _text_or_none(value: Any) -> str | None:
    if type(value) is str:  # the common case, first: this runs once per row
        return value
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value if isinstance(value, str) else str(value)


# -- delimited text ----------------------------------------------------------------------


def _bom_and_codec(raw: bytes, encoding: str | None, where: Path) -> tuple[bytes, str]:
    try:
        name = codecs.lookup(encoding or "utf-8").name
    except LookupError as exc:
        raise ExportError(f"Cannot export {where}: unknown encoding {encoding!r}") from exc
    if name in ("utf-8", "utf-8-sig"):
        return (codecs.BOM_UTF8, "utf-8") if raw.startswith(codecs.BOM_UTF8) else (b"", "utf-8")
    if name in ("utf-16", "utf-32"):
        # Longer marks first: a UTF-32-LE mark begins with the UTF-16-LE one.
        marks = {
            "utf-32": ((codecs.BOM_UTF32_LE, "le"), (codecs.BOM_UTF32_BE, "be")),
            "utf-16": ((codecs.BOM_UTF16_LE, "le"), (codecs.BOM_UTF16_BE, "be")),
        }[name]
        for bom, order in marks:
            if raw.startswith(bom):
                return bom, f"{name}-{order}"
        return b"", f"{name}-le"
    return b"", name


def _field_pattern(delim: str) -> str:
    d = re.escape(delim)
    # A quoted field (doubled quotes inside; stray text after the closing quote belongs to
    # the field, as pandas and the csv module read it), an unquoted field (a quote inside
    # it is literal), or nothing.
    return rf'(?:"[^"]*(?:""[^"]*)*"[^{d}\r\n]*|[^{d}\r\n"][^{d}\r\n]*|)'


def _split_records(text: str, delim: str, where: Path) -> list[tuple[int, int, int]]:
    """(start, end, stop) per record: content is text[start:end], its line break end:stop."""
    d = re.escape(delim)
    # Runs without quotes go in one step. As pandas and the csv module read it, a quote
    # is special only at the start of a field (12" screen holds a literal quote).
    run = r'[^"\r\n]*'
    # A quote at the start of a field opens a quoted section; one never closed runs to the
    # end of the text and is reported. Any other quote is a literal character.
    quote = (
        rf'(?:(?<=[{d}\r\n])|\A)"[^"]*(?:""[^"]*)*(?:"|(?P<open>\Z))'
        rf'|(?<=[^{d}\r\n])"'
    )
    # Unrolled (a run, then quote-run pairs) so no text can be matched two ways, and every
    # position matches: the scan is linear even on a broken file.
    record = re.compile(rf"({run}(?:(?:{quote}){run})*)(?:\r\n|\n|\r|\Z)")
    size = len(text)
    spans = []
    for m in record.finditer(text):
        start = m.start()
        if start == size:
            break  # the empty match after a final line break
        if m["open"] is not None:
            line = text.count("\n", 0, start) + 1
            raise ExportError(
                f"Cannot export {where}: a quoted field in the record at line {line} is not closed"
            )
        spans.append((start, m.end(1), m.end()))
    return spans


def _split_fields(text: str, start: int, end: int, field_re: re.Pattern[str]) -> list[tuple]:
    spans = []
    pos = start
    while True:
        stop = field_re.match(text, pos, end).end()  # type: ignore[union-attr]
        spans.append((pos, stop))
        if stop >= end:
            return spans
        pos = stop + 1  # skip the delimiter


def _unquote(field: str) -> str:
    if not field.startswith('"'):
        return field
    close = 1
    while True:
        close = field.index('"', close)
        if field.startswith('""', close):
            close += 2
            continue
        return field[1:close].replace('""', '"') + field[close + 1 :]


def _quote(value: str, delim: str, force: bool) -> str:
    needs = force or value == "" or delim in value or any(c in value for c in ('"', "\r", "\n"))
    return '"' + value.replace('"', '""') + '"' if needs else value


def _cleaned_delimited(
    source: SourceLike,
    label_column: str,
    new: list[str | None],
    old: list[str | None] | None,
    excluded: np.ndarray,
    keep_excluded: bool,
    flag_column: str,
) -> bytes:
    where = Path(source.path)
    delim = source.delimiter
    if not delim or len(delim) != 1 or delim in '"\r\n':
        raise ExportError(f"Cannot export {where}: unusable delimiter {delim!r}")
    try:
        raw = where.read_bytes()
    except OSError as exc:
        raise ExportError(f"Cannot read the source {where}: {exc.strerror or exc}") from exc
    bom, codec = _bom_and_codec(raw, source.encoding, where)
    body = raw[len(bom) :]
    try:
        text = body.decode(codec)
    except UnicodeDecodeError as exc:
        raise ExportError(
            f"Cannot export {where}: it does not decode as {source.encoding} ({exc.reason} "
            f"at byte {exc.start + len(bom)})"
        ) from exc
    if text.encode(codec) != body:
        raise ExportError(f"Cannot export {where}: {codec} does not reproduce its bytes")

    records = _split_records(text, delim, where)
    # pandas skips empty and whitespace-only lines (skip_blank_lines), but a line holding
    # the delimiter (a tab in a TSV) is a record of empty fields.
    content = [
        i for i, (s, e, _) in enumerate(records) if delim in text[s:e] or text[s:e].strip(" \t")
    ]
    if not content:
        raise ExportError(f"Cannot export {where}: no header line found")
    data = content[1:]
    if len(data) != source.n_rows:
        raise ExportError(
            f"Cannot export {where}: found {len(data)} data records but the loaded table "
            f"has {source.n_rows}; the file may have changed since it was loaded"
        )
    field_re = re.compile(_field_pattern(delim))
    head_start, head_end, _ = records[content[0]]
    head = _split_fields(text, head_start, head_end, field_re)
    width = len(source.columns)
    if len(head) != width:
        raise ExportError(
            f"Cannot export {where}: the header has {len(head)} fields, "
            f"the loaded table {width} columns"
        )
    col = list(source.columns).index(label_column)

    if old is not None:
        changed = {row for row in range(len(data)) if new[row] != old[row]}
    else:
        changed = {
            row
            for row, rec in enumerate(data)
            if _label_changed(text, records[rec], col, new[row], delim, field_re)
        }
    if keep_excluded:
        touched: list[int] = list(range(len(data)))
    else:
        touched = sorted(changed.union(np.flatnonzero(excluded).tolist()))

    # Copy the text between touched records in one slice each; only touched records are
    # rebuilt, so an export with few edits costs little more than a file copy.
    parts: list[str] = []
    cursor = 0
    if keep_excluded:
        parts += [text[:head_end], delim, _quote(flag_column, delim, False)]
        cursor = head_end
    for row in touched:
        start, end, stop = records[data[row]]
        parts.append(text[cursor:start])
        if excluded[row] and not keep_excluded:
            cursor = stop
            continue
        cursor = end  # the line break goes out with the next slice
        line = text[start:end]
        spans = None
        if row in changed:
            spans = _split_fields(text, start, end, field_re)
            missing = col + 1 - len(spans)
            if missing > 0:  # a short (ragged) record: add empty fields up to the label
                line += delim * missing
                spans += [(end + k, end + k) for k in range(missing)]
            a, b = spans[col]
            was_quoted = a < end and text[a] == '"'
            label = new[row]
            value = "" if label is None else _quote(label, delim, was_quoted)
            line = line[: a - start] + value + line[b - start :]
        if keep_excluded:
            if spans is not None:
                count = len(spans)
            elif '"' in line:
                count = len(_split_fields(text, start, end, field_re))
            else:  # no quotes: every delimiter separates fields
                count = line.count(delim) + 1
            line += delim * max(0, width - count)
            line += delim + ("true" if excluded[row] else "false")
        parts.append(line)
    parts.append(text[cursor:])

    out = "".join(parts)
    if records and records[-1][1] == records[-1][2]:
        # The source had no final line break; do not add one by dropping its last record.
        m = re.search(r"(\r\n|\n|\r)\Z", out)
        if m is not None:
            out = out[: m.start()]
    try:
        return bom + out.encode(codec)
    except UnicodeEncodeError as exc:
        bad = out[exc.start : exc.end]
        raise ExportError(
            f"Cannot export {where}: a label contains {bad!r}, which {source.encoding} "
            "cannot encode"
        ) from exc


def _label_changed(
    text: str,
    record: tuple[int, int, int],
    col: int,
    label: str | None,
    delim: str,
    field_re: re.Pattern[str],
) -> bool:
    start, end, _ = record
    line = text[start:end]
    if '"' in line:
        spans = _split_fields(text, start, end, field_re)
        current = _unquote(text[slice(*spans[col])]) if col < len(spans) else ""
    else:  # no quotes: every delimiter separates fields
        fields = line.split(delim)
        current = fields[col] if col < len(fields) else ""
    if label is None:
        return current not in _NA_TEXT
    return label != current


# -- Parquet -------------------------------------------------------------------------------


def _changed_rows(
    new: list[str | None], old: list[str | None] | None, loaded: list[Any]
) -> list[int]:
    base = old if old is not None else [_text_or_none(v) for v in loaded]
    return [i for i, (a, b) in enumerate(zip(new, base, strict=True)) if a != b]


def _cleaned_parquet(
    source, label_column, new, old, excluded, keep_excluded, flag_column, out_path, overwrite
) -> Path:
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
    changed = _changed_rows(new, old, loaded)
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

    def write(stream) -> None:
        pq.write_table(table, stream, compression=compression)

    return atomic_write(out_path, write, overwrite=overwrite, protect=(where,))


def _parquet_compression(pfile) -> dict[str, str] | str:
    meta = pfile.metadata
    if meta.num_row_groups == 0:
        return "snappy"
    group = meta.row_group(0)
    codecs_by_col = {}
    for j in range(group.num_columns):
        chunk = group.column(j)
        codecs_by_col[chunk.path_in_schema] = chunk.compression.lower()
    return codecs_by_col


def _arrow_cast(value: str | None, typ, column: str, where: Path):
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


def _cleaned_excel(
    source, label_column, new, old, excluded, keep_excluded, flag_column, out_path, overwrite
) -> Path:
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
    changed = _changed_rows(new, old, loaded)
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

    def write(stream) -> None:
        with pd.ExcelWriter(stream, engine="openpyxl") as writer:
            frame.to_excel(writer, sheet_name=sheet, index=False)

    return atomic_write(out_path, write, overwrite=overwrite, protect=(where,))


def _like(value: str | None, dtype, cell: Any, column: str, where: Path) -> Any:
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


# ----------------------------------------------------------------------------------------
# Audit log
# ----------------------------------------------------------------------------------------


def _plain(value: Any) -> Any:
    """JSON-ready: numpy to Python, NaN to None, datetimes to ISO 8601, tuples to lists."""
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, (dt.datetime, dt.date)):
        return value.isoformat()
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        return [_plain(v) for v in value]
    if isinstance(value, Path):
        return str(value)
    return value


def _columns(events: Sequence[Mapping]) -> list[str]:
    extra = sorted({str(k) for e in events for k in e} - set(AUDIT_COLUMNS))
    return [*AUDIT_COLUMNS, *extra]


def write_audit_csv(
    events: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write one CSV record per event (undo and redo included), UTF-8, RFC 4180 quoting.

    Columns: AUDIT_COLUMNS, then any other event keys sorted. List values (rows, row_ids,
    before, after, slack, zone) are stored as JSON text, e.g. ``["a", null]``, because a
    label may itself contain any separator; scalars are written as text, None as empty.
    ``protect`` names files the log must never replace (the source data file).
    """
    events = list(events)
    columns = _columns(events)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(columns)
    for event in events:
        writer.writerow([_csv_cell(event.get(c)) for c in columns])
    data = buffer.getvalue().encode("utf-8")
    return atomic_write_bytes(
        out_path, data, overwrite=overwrite, protect=tuple(Path(p) for p in protect)
    )


def _csv_cell(value: Any) -> str:
    value = _plain(value)
    if value is None:
        return ""
    if isinstance(value, (list, dict)):
        return json.dumps(value, ensure_ascii=False)
    return str(value)


def write_audit_jsonl(
    events: Sequence[Mapping[str, Any]],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write one JSON object per line per event (undo and redo included), UTF-8.

    Keys in AUDIT_COLUMNS order, then other keys sorted; missing keys are written as null;
    NaN and infinities as null; numpy values as plain numbers.
    """
    events = list(events)
    columns = _columns(events)
    lines = [
        json.dumps({c: _plain(e.get(c)) for c in columns}, ensure_ascii=False, allow_nan=False)
        for e in events
    ]
    data = "".join(line + "\n" for line in lines).encode("utf-8")
    return atomic_write_bytes(
        out_path, data, overwrite=overwrite, protect=tuple(Path(p) for p in protect)
    )


# ----------------------------------------------------------------------------------------
# HTML summary
# ----------------------------------------------------------------------------------------

CAUTION = (
    "The ranking only suggests which rows to look at; a person decides every change. "
    "Cleaned data used for decisions about people needs the usual care and review."
)

_CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:60em;
color:#1d2327;line-height:1.45}
h1{font-size:1.5em;margin-bottom:.2em}h2{font-size:1.15em;margin-top:1.6em;
border-bottom:1px solid #c9d1d6;padding-bottom:.2em}
table{border-collapse:collapse;margin:.5em 0}th,td{border:1px solid #c9d1d6;
padding:.25em .6em;text-align:left;vertical-align:top}th{background:#eef2f4}
td.num{text-align:right;font-variant-numeric:tabular-nums}
code{font-family:ui-monospace,Menlo,Consolas,monospace;word-break:break-all}
.caution{border-left:4px solid #b26b00;background:#fff6e5;padding:.6em 1em}
figure{margin:1em 0}figcaption{font-size:.9em;color:#50575e}img{max-width:100%}
.meta{color:#50575e;font-size:.9em}
"""


def _e(value: Any) -> str:
    value = _plain(value)
    if value is None:
        return ""
    if isinstance(value, float):
        return html.escape(f"{value:.6g}")
    if isinstance(value, (list, dict)):
        return html.escape(json.dumps(value, ensure_ascii=False))
    return html.escape(str(value))


def _cell(value: Any) -> str:
    numeric = isinstance(_plain(value), (int, float)) and not isinstance(value, bool)
    return f'<td class="num">{_e(value)}</td>' if numeric else f"<td>{_e(value)}</td>"


def _kv_table(mapping: Mapping[str, Any], head: tuple[str, str]) -> str:
    rows = "".join(f"<tr><th>{_e(k)}</th>{_cell(v)}</tr>" for k, v in mapping.items())
    return f"<table><tr><th>{_e(head[0])}</th><th>{_e(head[1])}</th></tr>{rows}</table>"


def _metrics_table(metrics: Mapping[str, Any]) -> str:
    rows = []
    for name, pair in metrics.items():
        before, after = pair
        change = ""
        b, a = _plain(before), _plain(after)
        if isinstance(b, (int, float)) and isinstance(a, (int, float)):
            change = a - b
        rows.append(f"<tr><th>{_e(name)}</th>{_cell(before)}{_cell(after)}{_cell(change)}</tr>")
    head = "<tr><th>metric</th><th>before</th><th>after</th><th>change</th></tr>"
    return f"<table>{head}{''.join(rows)}</table>"


def _rows_table(rows: Sequence[Mapping[str, Any]]) -> str:
    columns: list[str] = []
    for row in rows:
        columns += [str(k) for k in row if str(k) not in columns]
    head = "".join(f"<th>{_e(c)}</th>" for c in columns)
    body = "".join("<tr>" + "".join(_cell(row.get(c)) for c in columns) + "</tr>" for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def write_summary_html(
    summary: Mapping[str, Any],
    out_path: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    protect: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write a self-contained HTML summary of a review (inline CSS, no outside links).

    Accepted keys (all optional except source_path and source_sha256):
      source_path: str | Path            the data file reviewed
      source_sha256: str                 its SHA-256 fingerprint
      title: str                         heading; default "Review summary"
      reviewer: str                      who reviewed
      label_column: str
      cleaned_path, audit_path: str      where the exports went
      settings: Mapping[str, Any]        fit settings (kernel, C, gamma, folds, seed, ...)
      counts_by_action: Mapping[str, int]
      counts_by_reason: Mapping[str, int]
      metrics: Mapping[str, (before, after)]               one before/after table
      metric_tables: Mapping[str, Mapping[str, (before, after)]]  titled tables
      changed_rows: Sequence[Mapping[str, Any]]            one table row each
      images: Mapping[str, bytes]        caption -> PNG bytes, embedded as data: URIs
      exported_at: str | datetime        default: now, ISO 8601 UTC
    Every value is HTML-escaped. The app version (reviewer.__version__) and a caution
    sentence (CAUTION) are always included.
    """
    from reviewer._version import __version__

    for key in ("source_path", "source_sha256"):
        if key not in summary:
            raise ExportError(f"Cannot write summary {out_path}: missing {key!r}")
    when = summary.get("exported_at") or dt.datetime.now(dt.timezone.utc)
    if isinstance(when, dt.datetime):
        when = when.astimezone(dt.timezone.utc).isoformat(timespec="seconds")
    title = summary.get("title") or "Review summary"

    meta = {
        "source file": summary["source_path"],
        "SHA-256": summary["source_sha256"],
    }
    for key, label in (
        ("label_column", "label column"),
        ("reviewer", "reviewer"),
        ("cleaned_path", "cleaned file"),
        ("audit_path", "audit log"),
    ):
        if summary.get(key) is not None:
            meta[label] = summary[key]
    meta["exported at (UTC)"] = when
    meta["Margin Reviewer version"] = __version__

    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
        f'<p class="caution">{html.escape(CAUTION)}</p>',
        "<h2>Source</h2>",
        "<table>"
        + "".join(
            f"<tr><th>{_e(k)}</th><td><code>{_e(v)}</code></td></tr>"
            if k in ("source file", "SHA-256")
            else f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>"
            for k, v in meta.items()
        )
        + "</table>",
    ]
    if summary.get("settings"):
        parts += ["<h2>Settings</h2>", _kv_table(summary["settings"], ("setting", "value"))]
    if summary.get("counts_by_action") is not None:
        parts += [
            "<h2>Edits by action</h2>",
            _kv_table(summary["counts_by_action"], ("action", "count")),
        ]
    if summary.get("counts_by_reason") is not None:
        parts += [
            "<h2>Edits by reason</h2>",
            _kv_table(summary["counts_by_reason"], ("reason", "count")),
        ]
    tables: dict[str, Mapping[str, Any]] = {}
    if summary.get("metrics"):
        tables["Before and after"] = summary["metrics"]
    tables.update(summary.get("metric_tables") or {})
    for name, metrics in tables.items():
        parts += [f"<h2>{_e(name)}</h2>", _metrics_table(metrics)]
    if summary.get("changed_rows"):
        parts += ["<h2>Changed rows</h2>", _rows_table(summary["changed_rows"])]
    for caption, png in (summary.get("images") or {}).items():
        if not isinstance(png, (bytes, bytearray)) or not bytes(png).startswith(b"\x89PNG"):
            raise ExportError(f"Cannot write summary {out_path}: image {caption!r} is not PNG")
        data = base64.b64encode(bytes(png)).decode("ascii")
        parts.append(
            f'<figure><img alt="{_e(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{_e(caption)}</figcaption></figure>"
        )
    parts += [
        f'<p class="meta">Written by Margin Reviewer {_e(__version__)} at {_e(when)}.</p>',
        "</body></html>",
        "",
    ]
    return atomic_write_bytes(
        out_path,
        "\n".join(parts).encode("utf-8"),
        overwrite=overwrite,
        protect=tuple(Path(p) for p in protect),
    )
