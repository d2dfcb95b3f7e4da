"""The load-memory benchmark's small mode, run as a user would; it also checks load progress."""

from __future__ import annotations

import itertools
import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_load_memory_benchmark_smoke_reports_progress(tmp_path: Path) -> None:
    done = subprocess.run(
        [
            sys.executable,
            str(ROOT / "tests" / "benchmarks" / "load_memory.py"),
            "--smoke",
            "--out-dir",
            str(tmp_path),
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=600,
    )
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "load_memory.md").is_file()
    result = json.loads((tmp_path / "load_memory.json").read_text())
    assert result["rows"] == 50_000
    fractions = result["progress_fractions"]
    assert len(fractions) > 1
    assert all(b > a for a, b in itertools.pairwise(fractions))
    assert fractions[-1] == 1.0
    assert result["peak_rss_bytes"] > 0 and result["matrix_bytes"] > 0
