"""Fuzzed inputs to the loader: a table or an InputError naming the file, never anything else.

Strategies build awkward but plausible delimited text (odd delimiters, quoting, embedded
newlines, byte-order marks, Latin-1 and UTF-16, ragged rows, duplicate and empty names,
extreme numbers, missing markers, mixed column types, very wide tables) and plain random
bytes; Excel and Parquet files are damaged or mislabelled on purpose.
"""

from __future__ import annotations

import io
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import LoadedTable, load_table
from reviewer.core.data.roles import infer_roles
from reviewer.core.errors import InputError, ReviewerError

ROOT = Path(__file__).resolve().parents[2]
FUZZ = settings(
    max_examples=300,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    database=None,
)

# Cell texts chosen to stress type inference and number parsing.
ODD_CELLS = [
    "",
    "?",
    "null",
    "NULL",
    "NaN",
    "nan",
    "NA",
    "-",
    "inf",
    "-inf",
    "Infinity",
    "1e308",
    "-1e308",
    "1e400",
    "1e-320",
    "0",
    "-0",
    "99999999999999999999999999",
    "-9223372036854775809",
    "18446744073709551616",
    "3.14",
    "1,5",
    "TRUE",
    "false",
    "2024-01-31",
    "2024-13-45T99:99",
    "crème brûlée",
    "a\nb",
    'say "hi"',
    "x,y;z|w\tv",
    " padded ",
    "\u00a0",
    "日本",
]
cells = st.one_of(
    st.sampled_from(ODD_CELLS),
    st.integers(-(10**20), 10**20).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.text(max_size=8),
)
names = st.one_of(st.sampled_from(["", "a", "a", "label", "Unnamed: 0", "column_2", " "]), cells)
delimiters = st.sampled_from([",", ";", "\t", "|", " ", ":", "\x1f", ",,"])
encodings = st.sampled_from(["utf-8", "utf-8-sig", "latin-1", "utf-16", "utf-16-le", "cp1252"])
suffixes = st.sampled_from([".csv", ".tsv", ".txt", ".dat", ".psv", "", ".weird"])


def quote(cell: str, delimiter: str, style: str) -> str:
    if style == "always" or (
        style == "needed" and any(ch in cell for ch in (delimiter, '"', "\n", "\r"))
    ):
        return '"' + cell.replace('"', '""') + '"'
    if style == "broken":
        return '"' + cell
    return cell


@st.composite
def delimited_files(draw) -> tuple[bytes, str]:
    n_cols = draw(st.integers(0, 8))
    header = [draw(names) for _ in range(n_cols)]
    n_rows = draw(st.integers(0, 12))
    rows = []
    for _ in range(n_rows):
        width = n_cols + draw(st.sampled_from([0, 0, 0, -1, 1, 3])) if n_cols else 1
        rows.append([draw(cells) for _ in range(max(width, 0))])
    delimiter = draw(delimiters)
    style = draw(st.sampled_from(["needed", "needed", "always", "none", "broken"]))
    newline = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    lines = [delimiter.join(quote(c, delimiter, style) for c in r) for r in [header, *rows]]
    text = newline.join(lines) + draw(st.sampled_from(["", newline, newline * 3]))
    encoding = draw(encodings)
    data = text.encode(encoding, errors="replace")
    return data, draw(suffixes)


def _check(path: Path) -> LoadedTable | None:
    """The property: a table, or InputError whose message names the file."""
    try:
        loaded = load_table(path)
    except InputError as exc:
        assert path.name in str(exc), f"message does not name the file: {exc}"
        return None
    assert isinstance(loaded, LoadedTable)
    assert loaded.frame.shape[0] >= 1 and loaded.frame.shape[1] >= 1
    cols = list(loaded.frame.columns)
    assert len(set(cols)) == len(cols) and all(isinstance(c, str) and c for c in cols)
    return loaded


def _chain(loaded: LoadedTable) -> None:
    """Roles (first column as the label) and features: they work or raise ReviewerError."""
    frame = loaded.frame
    try:
        roles = infer_roles(frame, frame.columns[0])
        X, feature_names = feature_matrix(frame, roles)
    except ReviewerError:
        return
    assert X.shape[0] == len(frame)
    assert X.shape[1] == len(feature_names)
    # Whatever reaches the solver must be finite, or LIBSVM refuses it with a raw ValueError.
    assert np.isfinite(X).all()


def _write(data: bytes, suffix: str) -> Path:
    folder = Path(tempfile.mkdtemp(prefix="fuzz_"))
    path = folder / f"input{suffix}"
    path.write_bytes(data)
    return path


@FUZZ
@given(delimited_files())
def test_fuzzed_delimited_text_loads_or_names_the_file(case: tuple[bytes, str]) -> None:
    data, suffix = case
    loaded = _check(_write(data, suffix))
    if loaded is not None:
        _chain(loaded)


@FUZZ
@given(st.binary(max_size=2048), suffixes)
def test_random_bytes_load_or_name_the_file(data: bytes, suffix: str) -> None:
    loaded = _check(_write(data, suffix))
    if loaded is not None:
        _chain(loaded)


@settings(FUZZ, max_examples=6)
@given(
    st.integers(1000, 3000),
    st.integers(1, 5),
    st.sampled_from([",", ";", "\t"]),
    st.sampled_from(["num", "mixed", "missing"]),
)
def test_thousands_of_columns(n_cols: int, n_rows: int, delimiter: str, fill: str) -> None:
    rng = np.random.default_rng(n_cols * 7 + n_rows)
    header = delimiter.join(f"c{i}" for i in range(n_cols))
    lines = [header]
    for r in range(n_rows):
        if fill == "num":
            vals = rng.normal(size=n_cols).round(3).astype(str)
        elif fill == "mixed":
            vals = np.where(rng.random(n_cols) < 0.5, "x", "1.5")
        else:
            vals = np.where(rng.random(n_cols) < 0.7, "", str(r))
        lines.append(delimiter.join(vals))
    loaded = _check(_write(("\n".join(lines) + "\n").encode(), ".csv"))
    if loaded is not None:
        assert loaded.frame.shape[1] == n_cols
        _chain(loaded)


@settings(FUZZ, max_examples=150)
@given(
    st.lists(st.sampled_from(ODD_CELLS[:20]), min_size=2, max_size=30),
    st.lists(st.floats(allow_nan=True, allow_infinity=True, width=64), min_size=2, max_size=30),
)
def test_extreme_numbers_reach_the_features_finite(texts: list[str], floats: list[float]) -> None:
    n = min(len(texts), len(floats))
    labels = ["a", "b"] * n
    frame_text = "label,t,f\n" + "\n".join(
        f"{labels[i]},{texts[i]},{floats[i]!r}" for i in range(n)
    )
    loaded = _check(_write(frame_text.encode(), ".csv"))
    if loaded is not None:
        _chain(loaded)


# ---- binary formats ----------------------------------------------------------------------


def _sample_frame() -> pd.DataFrame:
    rng = np.random.default_rng(0)
    return pd.DataFrame(
        {
            "label": rng.choice(["cat", "dog"], 40),
            "x": rng.normal(size=40),
            "k": rng.choice(["p", "q", "r"], 40),
        }
    )


def _parquet_bytes() -> bytes:
    buf = io.BytesIO()
    _sample_frame().to_parquet(buf)
    return buf.getvalue()


def _excel_bytes() -> bytes:
    buf = io.BytesIO()
    _sample_frame().to_excel(buf, index=False, engine="openpyxl")
    return buf.getvalue()


GOOD = {".parquet": _parquet_bytes(), ".xlsx": _excel_bytes()}


@settings(FUZZ, max_examples=120)
@given(
    st.sampled_from(sorted(GOOD)),
    st.sampled_from(["truncate", "flip", "both"]),
    st.data(),
)
def test_damaged_parquet_and_excel(suffix: str, damage: str, data) -> None:
    raw = bytearray(GOOD[suffix])
    if damage in ("flip", "both"):
        for _ in range(data.draw(st.integers(1, 20))):
            at = data.draw(st.integers(0, len(raw) - 1))
            raw[at] ^= data.draw(st.integers(1, 255))
    if damage in ("truncate", "both"):
        raw = raw[: data.draw(st.integers(0, len(raw) - 1))]
    loaded = _check(_write(bytes(raw), suffix))
    if loaded is not None:
        _chain(loaded)


@pytest.mark.parametrize("content", [".parquet", ".xlsx", "csv", "utf16"])
@pytest.mark.parametrize("suffix", [".parquet", ".xlsx", ".csv", ".xlsm", ".pq", ".tsv", ".xls"])
def test_mislabelled_extension(tmp_path: Path, content: str, suffix: str) -> None:
    if content in GOOD:
        data = GOOD[content]
    else:
        text = _sample_frame().to_csv(index=False)
        data = text.encode("utf-16" if content == "utf16" else "utf-8")
    path = tmp_path / f"data{suffix}"
    path.write_bytes(data)
    loaded = _check(path)
    if loaded is not None:
        # When a file is accepted despite its name, it must still be the right table.
        assert loaded.frame.shape == (40, 3), loaded.frame.shape
        assert list(loaded.frame.columns) == ["label", "x", "k"]


def test_header_only_and_empty_files_are_refused_by_name(tmp_path: Path) -> None:
    for name, data in [
        ("empty.csv", b""),
        ("blank.csv", b"\n\n  \n"),
        ("header.csv", b"a,b,label\n"),
        ("bom_only.csv", b"\xef\xbb\xbf"),
        ("utf16_header.csv", "a,b\n".encode("utf-16")),
        ("utf16_bom_only.csv", b"\xff\xfe"),
    ]:
        path = tmp_path / name
        path.write_bytes(data)
        with pytest.raises(InputError) as err:
            load_table(path)
        assert name in str(err.value)


def test_cli_scan_refuses_a_fuzzed_bad_file_with_one_error_line(tmp_path: Path) -> None:
    # Half a Parquet file given a .csv name: not text, not a whole Parquet file.
    path = tmp_path / "broken.csv"
    path.write_bytes(GOOD[".parquet"][: len(GOOD[".parquet"]) // 2])
    done = subprocess.run(
        [sys.executable, "-m", "reviewer", "scan", str(path), "--label", "label"],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert done.returncode == 2, done.stderr
    lines = [line for line in done.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), done.stderr
    assert "broken.csv" in lines[0]
    assert "Traceback" not in done.stderr
