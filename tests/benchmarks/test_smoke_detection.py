"""The detection benchmark's smoke mode runs end to end and writes both result files."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

SCRIPT = Path(__file__).resolve().parent / "detection.py"
METHOD_NAMES = (
    "auto",
    "auto_training",
    "linear_training",
    "linear_heldout",
    "rbf_training",
    "rbf_heldout",
    "logreg_oof",
    "hgb_oof",
    "knn_oof",
    "random",
)


def test_smoke_run_writes_markdown_and_json_with_every_method(tmp_path: Path) -> None:
    done = subprocess.run(
        [sys.executable, str(SCRIPT), "--smoke", "--out-dir", str(tmp_path)],
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    md = tmp_path / "detection_smoke.md"
    js = tmp_path / "detection_smoke.json"
    assert md.is_file() and js.is_file()
    text = md.read_text(encoding="utf-8")
    data = json.loads(js.read_text(encoding="utf-8"))
    summary_methods = {s["method"] for s in data["summary"]}
    for name in METHOD_NAMES:
        assert f"| {name} |" in text
        assert name in summary_methods
    assert "Verdict" in text and "Recommended default score" in text
    for s in data["summary"]:
        assert 0.0 <= s["ap"] <= 1.0 and 0.0 <= s["auroc"] <= 1.0
