"""The `scan` command, run as a user runs it: a real subprocess from the repository root."""

from __future__ import annotations

import io
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "reviewer" / "demo_data"
SCAN_COLUMNS = [
    "row_id",
    "label",
    "model_label",
    "margin",
    "slack",
    "heldout_margin",
    "heldout_slack",
    "alpha",
    "zone",
    "support",
    "score",
    "rank",
]
FAST = ["--kernel", "linear", "--C", "1"]


def scan(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "reviewer", "scan", *map(str, args)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )


def read_output(proc: subprocess.CompletedProcess[str]) -> pd.DataFrame:
    assert proc.returncode == 0, proc.stderr
    return pd.read_csv(io.StringIO(proc.stdout), dtype={"row_id": str})


def assert_one_line_error(proc: subprocess.CompletedProcess[str], *words: str) -> str:
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:"), proc.stderr
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""
    for word in words:
        assert word in lines[0], lines[0]
    return lines[0]


@pytest.fixture(scope="module")
def demo_scan() -> tuple[subprocess.CompletedProcess[str], pd.DataFrame]:
    proc = scan(DEMO / "coffee_lots.csv", "--label", "grade", "--id", "lot_id")  # default: auto
    return proc, read_output(proc)


def test_demo_scan_has_the_documented_columns_in_input_order(demo_scan) -> None:
    proc, out = demo_scan
    source = pd.read_csv(DEMO / "coffee_lots.csv", dtype=str)
    assert list(out.columns) == SCAN_COLUMNS
    assert len(out) == len(source)
    assert out["row_id"].tolist() == source["lot_id"].tolist()
    assert out["label"].tolist() == source["grade"].tolist()
    assert out["rank"].tolist() != sorted(out["rank"].tolist())  # input order, not rank order
    assert sorted(out["rank"].tolist()) == list(range(1, len(out) + 1))
    assert out.loc[out["rank"] == 1, "score"].iloc[0] == out["score"].max()
    assert set(out["zone"]) <= {"wrong_side", "inside_margin", "clear"}
    assert set(out["support"]) <= {"non_support", "margin_support", "bound_support"}
    assert "auto chose" in proc.stderr and "Traceback" not in proc.stderr


def _planted_in_top_tenth(out: pd.DataFrame) -> int:
    planted = set(pd.read_csv(DEMO / "planted_errors.csv", dtype=str)["lot_id"])
    top = out[out["rank"] <= len(out) // 10]
    return int(top["row_id"].isin(planted).sum())


def test_demo_scan_puts_planted_errors_near_the_top(demo_scan) -> None:
    _, out = demo_scan
    # The default reads the tasting note as text: measured 59 of 90 in the top 180 rows
    # (auto chose linear on the mixed text and numbers; rbf would find 71).
    assert _planted_in_top_tenth(out) >= 50


def test_demo_as_the_window_opens_it_puts_planted_errors_near_the_top() -> None:
    # The window's coffee demo leaves the tasting note out of the features (demo_data's
    # COFFEE_DEMO_ROLES): measured 73 of 90 in the top 180 rows with auto.
    proc = scan(
        DEMO / "coffee_lots.csv", "--label", "grade", "--id", "lot_id",
        "--role", "cupper_note=ignore",
    )  # fmt: skip
    assert _planted_in_top_tenth(read_output(proc)) >= 62


def test_folds_zero_leaves_heldout_columns_empty(tmp_path: Path) -> None:
    target = tmp_path / "out.csv"
    proc = scan(
        DEMO / "coffee_lots.csv", "--label", "grade", "--id", "lot_id", *FAST, "--folds", "0",
        "--out", target,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout == ""
    out = pd.read_csv(target)
    assert list(out.columns) == SCAN_COLUMNS
    assert out["heldout_margin"].isna().all() and out["heldout_slack"].isna().all()
    assert out["margin"].notna().all()
    np.testing.assert_allclose(out["score"], -out["margin"], atol=1e-9)


def _write(tmp_path: Path, frame: pd.DataFrame, name: str = "t.csv") -> Path:
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return path


def _small(n: int = 30) -> pd.DataFrame:
    rng = np.random.default_rng(0)
    x = rng.normal(size=n)
    return pd.DataFrame(
        {"id": [f"r{i}" for i in range(n)], "x": x, "label": np.where(x > 0, "hi", "lo")}
    )


def test_row_id_is_position_without_id(tmp_path: Path) -> None:
    out = read_output(scan(_write(tmp_path, _small()), "--label", "label", *FAST))
    assert out["row_id"].tolist() == [str(i) for i in range(30)]


def test_missing_file(tmp_path: Path) -> None:
    assert_one_line_error(scan(tmp_path / "absent.csv", "--label", "y", *FAST), "absent.csv")


def test_folder(tmp_path: Path) -> None:
    assert_one_line_error(scan(tmp_path, "--label", "y", *FAST), "folder")


def test_not_a_table(tmp_path: Path) -> None:
    path = tmp_path / "noise.csv"
    path.write_bytes(np.random.default_rng(1).integers(0, 256, 5000, dtype=np.uint8).tobytes())
    assert_one_line_error(scan(path, "--label", "y", *FAST), "noise.csv")


def test_label_column_absent(tmp_path: Path) -> None:
    path = _write(tmp_path, _small())
    assert_one_line_error(scan(path, "--label", "grade", *FAST), "'grade'", "'label'")


def test_fewer_than_two_classes(tmp_path: Path) -> None:
    frame = _small()
    frame["label"] = "hi"
    assert_one_line_error(scan(_write(tmp_path, frame), "--label", "label", *FAST), "two classes")


def test_no_usable_feature(tmp_path: Path) -> None:
    frame = _small()
    frame["x"] = 1.0
    line = assert_one_line_error(scan(_write(tmp_path, frame), "--label", "label", *FAST))
    assert "no usable feature" in line and "constant" in line


def test_duplicate_ids(tmp_path: Path) -> None:
    frame = _small()
    frame.loc[7, "id"] = "r3"
    proc = scan(_write(tmp_path, frame), "--label", "label", "--id", "id", *FAST)
    assert_one_line_error(proc, "'id'", "'r3'")


@pytest.mark.parametrize("c_arg", [["--C", "-1"], ["--C=-1"], ["--C", "0"], ["--C", "abc"]])
def test_bad_c(tmp_path: Path, c_arg: list[str]) -> None:
    proc = scan(_write(tmp_path, _small()), "--label", "label", "--kernel", "linear", *c_arg)
    assert_one_line_error(proc, "C" if "abc" not in c_arg else "abc")


def test_bad_kernel(tmp_path: Path) -> None:
    proc = scan(_write(tmp_path, _small()), "--label", "label", "--kernel", "sigmoid")
    assert_one_line_error(proc, "sigmoid")


def test_class_too_small_for_the_folds_warns_and_succeeds(tmp_path: Path) -> None:
    frame = _small()
    frame["label"] = "common"
    frame.loc[[2, 9], "label"] = "rare"
    proc = scan(_write(tmp_path, frame), "--label", "label", *FAST)
    out = read_output(proc)
    assert len(out) == 30
    assert "note:" in proc.stderr and "lowered from 5 to 2" in proc.stderr
    assert out["heldout_margin"].notna().all()


def test_single_row_class_warns_and_succeeds(tmp_path: Path) -> None:
    frame = _small()
    frame.loc[4, "label"] = "odd"
    proc = scan(_write(tmp_path, frame), "--label", "label", *FAST)
    out = read_output(proc)
    assert "single labelled row" in proc.stderr
    assert np.isnan(out.loc[4, "heldout_margin"])
    # a labelled row always gets a rank; the lone "odd" row is the most suspect one
    assert out["rank"].notna().all()
    assert out.loc[4, "rank"] <= 3
