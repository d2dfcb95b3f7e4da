"""Cleaned delimited text (CSV, TSV, ...) rebuilt from the source bytes, not re-serialised.

The file is split into records and fields by hand (quotes, doubled quotes, embedded line
breaks, CRLF / LF / CR) and only the text of a changed label field is replaced. Delimiter,
encoding, byte-order mark, line endings, quoting and every other byte stay as they were.
"""

from __future__ import annotations

import codecs
import re
from pathlib import Path

import numpy as np

from reviewer.core.data.loading import MISSING_MARKERS, SourceInfo, decompress
from reviewer.core.errors import ExportError, InputError

__all__ = ["cleaned_delimited"]

# A field holding one of these was read as a missing label, so a None label there is no
# change; the loader reads with the same list.
_MISSING = frozenset(MISSING_MARKERS)


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


def cleaned_delimited(
    source: SourceInfo,
    label_column: str,
    new: list[str | None],
    old: list[str | None] | None,
    excluded: np.ndarray,
    keep_excluded: bool,
    flag_column: str,
) -> bytes:
    """The cleaned file's bytes: the source's, with changed labels replaced and rows dropped.

    ``new`` holds the labels to write and ``old`` the labels as loaded (None: compare with
    each field's own text, a field read as missing counting as None). With
    ``keep_excluded`` every record gets a last field ``flag_column`` of true/false instead.
    """
    where = Path(source.path)
    delim = source.delimiter
    if not delim or len(delim) != 1 or delim in '"\r\n':
        raise ExportError(f"Cannot export {where}: unusable delimiter {delim!r}")
    try:
        raw = where.read_bytes()
    except OSError as exc:
        raise ExportError(f"Cannot read the source {where}: {exc.strerror or exc}") from exc
    if source.compression:
        try:
            raw = decompress(raw, source.compression, where)
        except InputError as exc:
            raise ExportError(f"Cannot export: {exc}") from exc
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
        return current not in _MISSING
    return label != current
