"""Shared builders for the output tests: sources on disk, events, a report summary."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from reviewer.core.data.loading import SourceInfo


def delimited_source(path: Path, raw: bytes, delimiter: str, encoding: str, columns, n_rows):
    path.write_bytes(raw)
    return SourceInfo(
        path.resolve(), "delimited", "0" * 64, delimiter, encoding, None, n_rows, tuple(columns)
    )


def read_text_table(path: Path, delimiter: str, encoding: str) -> pd.DataFrame:
    return pd.read_csv(path, sep=delimiter, encoding=encoding, dtype=str, keep_default_na=False)


def assert_cells(source_df, out_df, label_column, new_labels: dict[int, str], excluded, flag=None):
    """The cleaned table equals the source cell by cell except the labels that changed."""
    expected = source_df.copy()
    for row, value in new_labels.items():
        expected.loc[row, label_column] = value
    if flag is None:
        expected = expected.loc[~excluded]
    else:
        expected[flag] = excluded
    pd.testing.assert_frame_equal(
        out_df.reset_index(drop=True), expected.reset_index(drop=True), check_dtype=True
    )


def no_leftovers(folder: Path, keep: set[str]) -> None:
    assert {p.name for p in folder.iterdir()} == keep


def sample_frame() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "id": np.array([10, 11, 12, 13], dtype="int64"),
            "weight": [0.5, np.nan, 2.25, 3.0],
            "origin": ["Kenya", "Perú", None, "<b>x</b>"],
            "label": ["washed", "natural", "washed", "honey"],
            "grade": np.array([1, 2, 3, 1], dtype="int64"),
        }
    )


def simple_csv(tmp_path) -> SourceInfo:
    return delimited_source(tmp_path / "d.csv", b"label\na\nb\n", ",", "utf-8", ("label",), 2)


def sample_events() -> list[dict]:
    base = {
        "time": "2025-01-02T03:04:05Z",
        "reviewer": "ana",
        "slack": [1.7, float("nan")],
        "zone": ["wrong_side", "clear"],
        "reason": "typo",
        "note": 'said "x", then |y|',
        "target": None,
    }
    return [
        {
            **base,
            "seq": 1,
            "action": "relabel",
            "rows": [3, 9],
            "row_ids": ["L3", "L9"],
            "before": ["cat", "cat|dog"],
            "after": ["dog", "dog"],
        },
        {
            **base,
            "seq": 2,
            "action": "exclude",
            "rows": [np.int64(4)],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "note": "line one\nline two",
        },
        {
            **base,
            "seq": 3,
            "action": "undo",
            "rows": [4],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "target": 2,
        },
        {
            **base,
            "seq": 4,
            "action": "redo",
            "rows": [4],
            "row_ids": ["L4"],
            "before": ["dog"],
            "after": ["dog"],
            "target": 2,
        },
    ]


PNG_1PX = bytes.fromhex(
    "89504e470d0a1a0a0000000d4948445200000001000000010806000000"
    "1f15c4890000000d49444154789c6360000002000100e221bc330000000049454e44ae426082"
)


def summary_for(src) -> dict:
    return {
        "source_path": str(src.path),
        "source_sha256": "ab" * 32,
        "reviewer": "ana <b>",
        "label_column": "label",
        "settings": {"kernel": "rbf", "C": 1.0, "gamma": "scale", "folds": 5},
        "counts_by_action": {"relabel": 7, "exclude": 3, "undo": 1},
        "counts_by_reason": {"typo": 6, "<script>alert(1)</script>": 4},
        "metrics": {"rows in margin": (120, 80), "held-out accuracy": (0.81, 0.9)},
        "changed_rows": [{"row_id": "L3", "before": "cat", "after": "<script>x</script>"}],
        "images": {"slack histogram": PNG_1PX},
    }
