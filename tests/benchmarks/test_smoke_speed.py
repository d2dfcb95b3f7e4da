"""CI runs the speed benchmark in its smoke size so the script cannot rot."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_speed_smoke_writes_its_tables(tmp_path: Path) -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "tests.benchmarks.speed", "--smoke", "--out-dir", str(tmp_path)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr
    data = json.loads((tmp_path / "speed_smoke.json").read_text())
    assert {r["method"] for r in data["rows"]} == {"tool", "sklearn"}
    assert all(r["seconds"] > 0 for r in data["rows"])
    assert "| rows |" in (tmp_path / "speed_smoke.md").read_text()
