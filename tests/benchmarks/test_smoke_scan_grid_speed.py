"""The settings-grid scan-time benchmark runs end to end in its smoke mode."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

SCRIPT = Path(__file__).resolve().parent / "scan_grid_speed.py"


def test_smoke_run_times_each_setting_and_names_its_solver(tmp_path: Path) -> None:
    done = subprocess.run(
        [sys.executable, str(SCRIPT), "--smoke", "--out-dir", str(tmp_path)],
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    data = json.loads((tmp_path / "scan_grid_speed_smoke.json").read_text(encoding="utf-8"))
    records = data["records"]
    assert {r["settings"] for r in records} == {"auto (default)", "linear C=0.01"}
    assert len({r["table"] for r in records}) == 2
    for r in records:
        assert r["seconds"] > 0 and r["solver"]
    text = (tmp_path / "scan_grid_speed_smoke.md").read_text(encoding="utf-8")
    assert "| auto (default) |" in text
