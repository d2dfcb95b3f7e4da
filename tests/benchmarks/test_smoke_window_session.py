"""CI runs the window-session benchmark in its smoke size so the script cannot rot."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_window_session_smoke_writes_its_tables(tmp_path: Path) -> None:
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "tests.benchmarks.window_session",
            "--smoke",
            "--out-dir",
            str(tmp_path),
        ],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
        env=env,
    )
    assert proc.returncode == 0, proc.stderr
    result = json.loads((tmp_path / "window_session_smoke.json").read_text())["result"]
    assert result["rows"] == 20_000
    assert all(result[k] > 0 for k in ("reopen_s", "show_s", "sort_by_slack_s", "sort_by_label_s"))
    assert "sort the list by slack" in (tmp_path / "window_session_smoke.md").read_text()
