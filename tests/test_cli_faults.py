"""Bad input and bad output paths on the command line: exit 2, one `error:` line, no traceback,
and the input is never written over."""

from __future__ import annotations

import gzip
import hashlib
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "reviewer" / "demo_data" / "coffee_lots.csv"
FAST = ["--kernel", "linear", "--C", "1", "--folds", "3"]


def run(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "reviewer", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=300,
        env={**os.environ, "PYTHONPATH": str(ROOT)},
    )


def refused(result: subprocess.CompletedProcess[str], pattern: str) -> None:
    assert result.returncode == 2, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error:"), result.stderr
    assert "Traceback" not in result.stderr
    assert pattern in lines[0], lines[0]


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture()
def data(tmp_path: Path) -> Path:
    copy = tmp_path / "d.csv"
    copy.write_bytes(DEMO.read_bytes())
    return copy


def test_scan_never_writes_over_its_input(data: Path, tmp_path: Path) -> None:
    before = digest(data)
    refused(run("scan", str(data), "--label", "grade", "--out", str(data), *FAST), "source")
    os.link(data, tmp_path / "hard.csv")
    refused(
        run("scan", str(data), "--label", "grade", "--out", str(tmp_path / "hard.csv"), *FAST),
        "source",
    )
    (tmp_path / "sym.csv").symlink_to(data)
    refused(
        run("scan", str(data), "--label", "grade", "--out", str(tmp_path / "sym.csv"), *FAST),
        "source",
    )
    assert digest(data) == before


def test_bad_output_paths_are_one_line_errors(data: Path, tmp_path: Path) -> None:
    missing = tmp_path / "missing" / "folder" / "o.csv"
    refused(run("scan", str(data), "--label", "grade", "--out", str(missing), *FAST), "folder")
    refused(run("scan", str(data), "--label", "grade", "--out", str(tmp_path), *FAST), "folder")


def test_scan_replaces_an_earlier_output_and_writes_parquet(data: Path, tmp_path: Path) -> None:
    out = tmp_path / "ranked.csv"
    out.write_text("old\n")
    assert run("scan", str(data), "--label", "grade", "--out", str(out), *FAST).returncode == 0
    ranked = pd.read_csv(out)
    assert len(ranked) == 1800 and "model_label" in ranked
    pq = tmp_path / "ranked.parquet"
    assert run("scan", str(data), "--label", "grade", "--out", str(pq), *FAST).returncode == 0
    pd.testing.assert_frame_equal(
        pd.read_parquet(pq)[["row_id", "rank"]].astype(str),
        ranked[["row_id", "rank"]].astype(str),
    )
    # No temporary files are left beside the outputs.
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_every_class_a_single_row_is_refused_with_the_reason(tmp_path: Path) -> None:
    rng = np.random.default_rng(0)
    path = tmp_path / "single.csv"
    pd.DataFrame(
        {"x": rng.normal(size=40), "z": rng.normal(size=40), "label": [f"c{i}" for i in range(40)]}
    ).to_csv(path, index=False)
    refused(run("scan", str(path), "--label", "label"), "every class has a single labelled row")


def test_a_continuous_label_is_refused_unless_asked_for(tmp_path: Path) -> None:
    rng = np.random.default_rng(1)
    path = tmp_path / "cont.csv"
    pd.DataFrame({"x": rng.normal(size=150), "y": np.round(rng.random(150), 3)}).to_csv(
        path, index=False
    )
    refused(run("scan", str(path), "--label", "y", *FAST), "looks like a continuous target")
    refused(run("probe", str(path), "--label", "y", *FAST), "--treat-as-classes")


@pytest.mark.parametrize("seed", ["-1", "4294967296"])
def test_a_seed_out_of_range_is_a_settings_error(data: Path, seed: str) -> None:
    refused(run("scan", str(data), "--label", "grade", "--seed", seed, *FAST), "seed must be")


def test_a_workbook_names_the_sheet_read_and_the_others(tmp_path: Path) -> None:
    path = tmp_path / "book.xlsx"
    frame = pd.read_csv(DEMO).head(200)
    with pd.ExcelWriter(path) as writer:
        pd.DataFrame({"about": ["lots of the 2026 harvest"]}).to_excel(
            writer, sheet_name="Notes", index=False
        )
        frame.to_excel(writer, sheet_name="Lots", index=False)
    refused(run("scan", str(path), "--label", "grade", *FAST), "sheet 'Notes'")
    ok = run("scan", str(path), "--label", "grade", "--sheet", "Lots", *FAST)
    assert ok.returncode == 0, ok.stderr
    assert ok.stdout.count("\n") == 201


def test_compressed_csv_reads_as_pandas_reads_it(tmp_path: Path) -> None:
    gz = tmp_path / "lots.csv.gz"
    gz.write_bytes(gzip.compress(DEMO.read_bytes()))
    ok = run("scan", str(gz), "--label", "grade", "--id", "lot_id", *FAST)
    assert ok.returncode == 0, ok.stderr
    plain = run("scan", str(DEMO), "--label", "grade", "--id", "lot_id", *FAST)
    assert ok.stdout == plain.stdout


def test_a_parquet_list_column_of_numbers_is_a_vector_feature(tmp_path: Path) -> None:
    rng = np.random.default_rng(2)
    frame = pd.DataFrame({"x": rng.normal(size=80), "label": ["a", "b"] * 40})
    frame["vec"] = [rng.normal(size=3) for _ in range(80)]
    path = tmp_path / "vec.parquet"
    frame.to_parquet(path)
    ok = run("scan", str(path), "--label", "label", *FAST)
    assert ok.returncode == 0, ok.stderr
    assert "vector: vec (3 features)" in ok.stderr


def test_verify_finds_a_changed_or_missing_export_file(tmp_path: Path) -> None:
    from reviewer.core.review.session import ReviewSession

    data = tmp_path / "lots.csv"
    data.write_bytes(DEMO.read_bytes())
    with ReviewSession.open(data, label="grade", id_column="lot_id") as s:
        s.relabel([0], "exchange")
        s.export(tmp_path / "clean.csv", audit=tmp_path / "audit.csv")
    ok = run("verify", str(tmp_path / "clean.csv"))
    assert ok.returncode == 0 and ok.stderr.startswith("ok:")
    (tmp_path / "audit.csv").write_text("edited by hand\n")
    refused(run("verify", str(tmp_path / "clean.csv")), "differs from the one this export wrote")
    (tmp_path / "audit.csv").unlink()
    refused(run("verify", str(tmp_path / "clean.csv.manifest.json")), "is missing")


def test_export_of_a_session_with_a_damaged_fit_warns_and_writes(tmp_path: Path) -> None:
    import sqlite3

    from reviewer.core.review.session import ReviewSession
    from reviewer.core.values import FitSettings

    data = tmp_path / "lots.csv"
    data.write_bytes(DEMO.read_bytes())
    with ReviewSession.open(data, label="grade", id_column="lot_id") as s:
        s.fit(FitSettings(kernel="linear", C=1.0, folds=3))
        s.confirm([1])
        session_path = s.session_path
    conn = sqlite3.connect(session_path)
    conn.execute(
        "UPDATE fit_rows SET data = CAST(substr(data,1,length(data)-8) || zeroblob(8) AS BLOB) "
        "WHERE slot='latest'"
    )
    conn.commit()
    conn.close()
    done = run("export", str(session_path), "--out", str(tmp_path / "x.csv"))
    assert done.returncode == 0, done.stderr
    assert "Traceback" not in done.stderr
    assert "warning: the saved latest fit was dropped" in done.stderr
    assert (tmp_path / "x.csv").is_file()
