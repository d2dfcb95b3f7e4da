"""Read a labelled table from delimited text, Parquet or Excel, and fingerprint the source.

Every failure becomes an :class:`InputError` whose message names the file and the problem.
"""

from __future__ import annotations

import csv
import hashlib
import io
import mmap
import os
import threading
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from reviewer.core.errors import InputError
from reviewer.core.progress import ProgressFn, Reporter

DELIMITED_SUFFIXES = {".csv", ".tsv", ".tab", ".txt", ".dat", ".psv"}
PARQUET_SUFFIXES = {".parquet", ".pq"}
EXCEL_SUFFIXES = {".xlsx", ".xlsm"}
# Every text read as a missing value: pandas' default na_values (its read_csv documentation)
# plus spellings seen in exported spreadsheets and survey tools (common practice). Export
# uses the same list to tell a missing label from a changed one.
MISSING_MARKERS = [
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
    "?",
    "Null",
    "-",
]
DELIMITER_CANDIDATES = [",", ";", "\t", "|"]
CHUNK_ROWS = 250_000


@dataclass(frozen=True)
class SourceInfo:
    """Where a table came from and how it was encoded, enough to write it back alike."""

    path: Path
    kind: str  # "delimited" | "parquet" | "excel"
    sha256: str
    delimiter: str | None
    encoding: str | None
    sheet: str | None
    n_rows: int
    columns: tuple[str, ...]
    sheets: tuple[str, ...] = ()  # every sheet of a workbook (``sheet`` is the one read)
    compression: str | None = None  # "gzip", "bz2", "xz" or "zip" for a compressed text file


COMPRESSED_SUFFIXES = {".gz": "gzip", ".bz2": "bz2", ".xz": "xz", ".zip": "zip"}


def decompress(raw: bytes, compression: str, p: Path) -> bytes:
    """The bytes of a compressed delimited file, as pandas would read them."""
    import bz2
    import gzip
    import lzma

    try:
        if compression == "gzip":
            return gzip.decompress(raw)
        if compression == "bz2":
            return bz2.decompress(raw)
        if compression == "xz":
            return lzma.decompress(raw)
        with zipfile.ZipFile(io.BytesIO(raw)) as archive:
            members = [m for m in archive.infolist() if not m.is_dir()]
            if len(members) != 1:
                raise InputError(
                    f"{p}: a zip archive must hold exactly one table file; it holds {len(members)}"
                )
            return archive.read(members[0])
    except (OSError, EOFError, lzma.LZMAError, zipfile.BadZipFile, ValueError) as exc:
        raise InputError(f"{p}: damaged {compression} file ({_first_line(exc)})") from exc


def _compression_of(p: Path, raw: bytes) -> str | None:
    by_suffix = COMPRESSED_SUFFIXES.get(p.suffix.lower())
    if by_suffix:
        return by_suffix
    if raw[:2] == b"\x1f\x8b":
        return "gzip"
    if raw[:3] == b"BZh":
        return "bz2"
    if raw[:6] == b"\xfd7zXZ\x00":
        return "xz"
    return None


@dataclass
class LoadedTable:
    frame: pd.DataFrame
    source: SourceInfo


def sha256_of(path: str | os.PathLike[str]) -> str:
    """SHA-256 of a file's bytes, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def load_table(
    path: str | os.PathLike[str],
    *,
    sheet: str | None = None,
    max_rows: int | None = None,
    progress: ProgressFn | None = None,
    cancel: threading.Event | None = None,
) -> LoadedTable:
    """Load ``path`` as a table. Raises InputError for anything that is not a usable table.

    ``max_rows`` reads only the first rows (a preview); the fingerprint is still of the
    whole file, and ``source.n_rows`` then counts the rows read."""
    report = Reporter(progress, cancel)
    p = Path(path).expanduser()
    if not p.exists():
        raise InputError(f"{p}: file not found")
    if p.is_dir():
        raise InputError(f"{p}: is a folder, not a data file")
    try:
        if _parquet_by_content(p):
            report(0.05, "reading Parquet")
            frame, digest = _load_parquet_mapped(p, max_rows)
            return _loaded(frame, p, "parquet", digest, report)
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"{p}: cannot be read ({exc.strerror or exc})") from exc
    report(0.05, "fingerprinting")
    digest = hashlib.sha256(raw).hexdigest()
    if not raw.strip():
        raise InputError(f"{p}: the file is empty")
    compression = _compression_of(p, raw)
    if compression:
        raw = decompress(raw, compression, p)
        if not raw.strip():
            raise InputError(f"{p}: the file is empty once decompressed")
    sheets: tuple[str, ...] = ()
    kind = "delimited" if compression else _detect_kind(p, raw)
    if kind == "parquet":
        frame = _read_parquet(p, raw, max_rows)
        delimiter = encoding = used_sheet = None
    elif kind == "excel":
        frame, used_sheet, sheets = _read_excel(p, raw, sheet, max_rows)
        delimiter = encoding = None
    else:
        encoding = detect_encoding(raw, p)
        text_sample = raw[:200_000].decode(encoding, errors="replace")
        delimiter = detect_delimiter(text_sample, p)
        frame = _read_delimited(p, raw, encoding, delimiter, report.slice(0.1, 1.0), max_rows)
        used_sheet = None
    return _loaded(
        frame, p, kind, digest, report, delimiter, encoding, used_sheet, sheets, compression
    )


def _loaded(
    frame: pd.DataFrame,
    p: Path,
    kind: str,
    digest: str,
    report: Reporter,
    delimiter: str | None = None,
    encoding: str | None = None,
    used_sheet: str | None = None,
    sheets: tuple[str, ...] = (),
    compression: str | None = None,
) -> LoadedTable:
    frame = _tidy_columns(frame, p)
    if frame.shape[1] == 0:
        raise InputError(f"{p}: no columns found; is this a table?")
    if len(frame) == 0:
        raise InputError(f"{p}: has a header but no data rows")
    report(1.0, f"loaded {len(frame):,} rows")
    info = SourceInfo(
        path=p.resolve(),
        kind=kind,
        sha256=digest,
        delimiter=delimiter,
        encoding=encoding,
        sheet=used_sheet,
        n_rows=len(frame),
        columns=tuple(frame.columns),
        sheets=sheets,
        compression=compression,
    )
    return LoadedTable(frame=frame, source=info)


def _detect_kind(p: Path, raw: bytes) -> str:
    suffix = p.suffix.lower()
    is_parquet = raw[:4] == b"PAR1"
    is_zip = raw[:4] == b"PK\x03\x04"
    if suffix in PARQUET_SUFFIXES:
        if not is_parquet:
            raise InputError(f"{p}: named .parquet but is not a Parquet file (bad magic bytes)")
        return "parquet"
    if suffix in EXCEL_SUFFIXES:
        if not is_zip:
            raise InputError(f"{p}: named {suffix} but is not an Excel workbook (not a zip)")
        return "excel"
    if suffix == ".xls":
        raise InputError(f"{p}: old .xls workbooks are not supported; save it as .xlsx or CSV")
    if is_parquet:
        return "parquet"
    if is_zip:
        return "excel"
    return "delimited"


def detect_encoding(raw: bytes, p: Path | str = "<data>") -> str:
    """UTF-8 (with or without BOM), UTF-16 (with BOM), else Latin-1."""
    if raw.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig"
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "utf-16"
    if b"\x00" in raw[:65536]:
        raise InputError(f"{p}: looks like a binary file (NUL bytes), not a delimited table")
    try:
        raw.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError:
        pass
    # Latin-1 maps every byte, so it always decodes; control bytes mean it is not text.
    sample = raw[:65536]
    controls = sum(sample.count(bytes([c])) for c in range(0, 32) if c not in (9, 10, 13))
    if controls > max(8, len(sample) // 200):
        raise InputError(f"{p}: looks like a binary file, not a delimited table")
    return "latin-1"


def detect_delimiter(text: str, p: Path | str = "<data>") -> str:
    """Pick the delimiter among , ; tab | that splits the first lines most consistently."""
    suffix = Path(str(p)).suffix.lower()
    lines = [line for line in text.splitlines()[:50] if line.strip()]
    if not lines:
        raise InputError(f"{p}: no text lines found")
    # Trust a .tsv name only when the header has a tab; a comma file renamed .tsv is common.
    if suffix in {".tsv", ".tab"} and "\t" in lines[0]:
        return "\t"
    try:
        dialect = csv.Sniffer().sniff(
            "\n".join(lines[:20]), delimiters="".join(DELIMITER_CANDIDATES)
        )
        if dialect.delimiter in DELIMITER_CANDIDATES:
            return dialect.delimiter
    except csv.Error:
        pass
    best, best_score = ",", -1.0
    for cand in DELIMITER_CANDIDATES:
        counts = [line.count(cand) for line in lines]
        if counts[0] == 0:
            continue
        same = sum(c == counts[0] for c in counts) / len(counts)
        score = same * 10 + min(counts[0], 50) / 50
        if score > best_score:
            best, best_score = cand, score
    return best


def _read_delimited(
    p: Path,
    raw: bytes,
    encoding: str,
    delimiter: str,
    report: Reporter,
    max_rows: int | None = None,
) -> pd.DataFrame:
    total_lines = max(raw.count(b"\n"), 1) if max_rows is None else max_rows
    options = dict(
        sep=delimiter,
        encoding=encoding,
        na_values=MISSING_MARKERS,
        keep_default_na=True,
        skipinitialspace=False,
        engine="c",
        chunksize=CHUNK_ROWS if max_rows is None else max_rows,
        nrows=max_rows,
        low_memory=False,
    )
    chunks = []
    read = 0
    try:
        with pd.read_csv(io.BytesIO(raw), **options) as reader:
            for chunk in reader:
                chunks.append(chunk)
                read += len(chunk)
                report(min(read / total_lines, 0.99), f"reading rows: {read:,}")
    except pd.errors.EmptyDataError as exc:
        raise InputError(f"{p}: no columns found; is this a table?") from exc
    except pd.errors.ParserError as exc:
        raise InputError(f"{p}: not a well-formed table ({_first_line(exc)})") from exc
    except (UnicodeDecodeError, UnicodeError) as exc:
        raise InputError(f"{p}: text is not valid {encoding} ({_first_line(exc)})") from exc
    except (ValueError, OverflowError, MemoryError) as exc:
        raise InputError(f"{p}: cannot be read as a table ({_first_line(exc)})") from exc
    if not chunks:
        raise InputError(f"{p}: has a header but no data rows")
    frame = chunks[0] if len(chunks) == 1 else pd.concat(chunks, ignore_index=True)
    return frame.reset_index(drop=True)


def _parquet_by_content(p: Path) -> bool:
    """A file that starts with Parquet's magic bytes and is not named as compressed text."""
    if p.suffix.lower() in COMPRESSED_SUFFIXES:
        return False
    with open(p, "rb") as handle:
        return handle.read(4) == b"PAR1"


def _load_parquet_mapped(p: Path, max_rows: int | None) -> tuple[pd.DataFrame, str]:
    """Read a Parquet file through a memory map, fingerprinting it on a second thread
    meanwhile (both let go of the interpreter lock): the file's bytes are never copied."""
    import mmap

    with open(p, "rb") as handle:
        mapped = mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ)
    digest: list[str] = []
    hasher = threading.Thread(target=lambda: digest.append(hashlib.sha256(mapped).hexdigest()))
    hasher.start()
    try:
        frame = _read_parquet(p, mapped, max_rows)
    finally:
        hasher.join()
    try:
        mapped.close()
    except BufferError:  # a column still points into the file; the map closes with it
        pass
    return frame, digest[0]


def _read_parquet(p: Path, raw: bytes | mmap.mmap, max_rows: int | None = None) -> pd.DataFrame:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        source = pa.BufferReader(pa.py_buffer(raw))
        if max_rows is not None:
            batches = pq.ParquetFile(source).iter_batches(batch_size=max_rows)
            first = next(batches, None)
            table = pa.Table.from_batches([first]) if first is not None else None
        else:
            table = None
        if table is None:
            table = pq.read_table(pa.BufferReader(pa.py_buffer(raw)))
        # Column by column, freeing Arrow's copy as it goes: one table's memory at a time.
        frame = table.to_pandas(split_blocks=True, self_destruct=True)
        del table
        return frame.reset_index(drop=True)
    except Exception as exc:  # pyarrow raises several unrelated types for damaged files
        raise InputError(f"{p}: damaged or unreadable Parquet file ({_first_line(exc)})") from exc


def _read_excel(
    p: Path, raw: bytes, sheet: str | None, max_rows: int | None = None
) -> tuple[pd.DataFrame, str, tuple[str, ...]]:
    try:
        book = pd.ExcelFile(io.BytesIO(raw), engine="openpyxl")
    except (zipfile.BadZipFile, KeyError, ValueError, OSError) as exc:
        raise InputError(f"{p}: damaged or unreadable Excel workbook ({_first_line(exc)})") from exc
    except Exception as exc:  # openpyxl raises its own types for malformed parts
        raise InputError(f"{p}: damaged or unreadable Excel workbook ({_first_line(exc)})") from exc
    names = [str(n) for n in book.sheet_names]
    if not names:
        raise InputError(f"{p}: the workbook has no sheets")
    if sheet is not None and sheet not in names:
        raise InputError(f"{p}: no sheet named {sheet!r}; sheets are {', '.join(names)}")
    chosen = sheet or names[0]
    try:
        frame = pd.read_excel(book, sheet_name=chosen, na_values=MISSING_MARKERS, nrows=max_rows)
    except Exception as exc:
        raise InputError(f"{p}: sheet {chosen!r} cannot be read ({_first_line(exc)})") from exc
    return frame.reset_index(drop=True), chosen, tuple(names)


def _tidy_columns(frame: pd.DataFrame, p: Path) -> pd.DataFrame:
    """Give every column a unique, non-empty text name (pandas may leave ints or blanks)."""
    names: list[str] = []
    seen: set[str] = set()
    for i, col in enumerate(frame.columns):
        name = str(col).strip()
        if not name or name.lower().startswith("unnamed:"):
            name = f"column_{i + 1}"
        base, k = name, 2
        while name in seen:
            name = f"{base}_{k}"
            k += 1
        seen.add(name)
        names.append(name)
    frame.columns = names
    return frame


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0][:200] if text else type(exc).__name__


def label_strings(values: pd.Series) -> np.ndarray:
    """A label column as text, None where missing; whole-number floats print as integers.

    Each distinct value is formatted once (a label column holds few), then spread to its rows."""
    series = values.reset_index(drop=True)
    missing = series.isna().to_numpy()
    texts: list[str | None]
    if pd.api.types.is_float_dtype(series.dtype):
        codes, distinct = pd.factorize(series.to_numpy(dtype=float, na_value=np.nan))
        texts = [
            str(int(v)) if np.isfinite(v) and np.floor(v) == v else repr(float(v)) for v in distinct
        ]
    else:
        objects = series.astype(object).to_numpy()
        kind = pd.api.types.infer_dtype(objects, skipna=True)
        if kind not in ("string", "integer", "boolean", "empty"):
            # Mixed objects: 1 and 1.0 are equal as keys yet print apart, so go row by row.
            codes, distinct = np.arange(len(objects)), objects
        else:
            codes, distinct = pd.factorize(objects, use_na_sentinel=False)
        texts = []
        for v in distinct:  # a missing value's text is never used: its rows take None
            text = str(v).strip()
            texts.append(text if text else None)
    table = np.empty(len(texts) + 1, dtype=object)
    table[: len(texts)] = texts  # the last entry, None, is what code -1 (missing) takes
    return table[np.where(missing, -1, codes)]


def table_from_frame(frame: pd.DataFrame, name: str = "<DataFrame>") -> LoadedTable:
    """A table already in memory, read like a file: columns get unique text names, the index
    is set aside (row positions 0..n-1), and the fingerprint is a SHA-256 of the content."""
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"expected a pandas DataFrame or a file path, got {type(frame).__name__}")
    if frame.shape[1] == 0:
        raise InputError(f"{name}: the DataFrame has no columns")
    if len(frame) == 0:
        raise InputError(f"{name}: the DataFrame has no rows")
    copy = _tidy_columns(frame.reset_index(drop=True).copy(), Path(name))
    try:
        hashed = pd.util.hash_pandas_object(copy, index=False).to_numpy()
        digest = hashlib.sha256(hashed.tobytes()).hexdigest()
    except TypeError:  # unhashable cells (lists): fall back to their text
        digest = hashlib.sha256(copy.astype(str).to_csv().encode()).hexdigest()
    info = SourceInfo(
        path=Path(name),
        kind="frame",
        sha256=digest,
        delimiter=None,
        encoding=None,
        sheet=None,
        n_rows=len(copy),
        columns=tuple(copy.columns),
    )
    return LoadedTable(frame=copy, source=info)
