"""The end-to-end scan benchmark runs in its smoke mode and reports what it promises."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_smoke_run_reports_the_ratio_stages_and_peak_memory(tmp_path: Path) -> None:
    script = [sys.executable, "-m", "tests.benchmarks.scan_end_to_end", "--smoke"]
    done = subprocess.run(
        [*script, "--out-dir", str(tmp_path)],
        capture_output=True,
        text=True,
        check=False,
        cwd=ROOT,
    )
    assert done.returncode == 0, done.stderr
    data = json.loads((tmp_path / "scan_end_to_end_smoke.json").read_text(encoding="utf-8"))
    assert data["rows"] == 20_000
    assert data["ratio"] == data["scan_median"] / data["baseline_median"] > 0
    assert data["scan_peak_rss_mb"] > 0
    assert data["stages"]["hinge solves"] == 6  # one full fit and five folds
    assert 0 < data["stages"]["of which the six hinge solves"] < data["scan_median"]
    text = (tmp_path / "scan_end_to_end_smoke.md").read_text(encoding="utf-8")
    assert "| six bare LinearSVC(dual=False) fits |" in text
