"""Command-line manners: a progress bar only on a terminal, --quiet, --summary as JSON."""

from __future__ import annotations

import fcntl
import json
import os
import pty
import struct
import subprocess
import sys
import termios
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "reviewer" / "demo_data" / "coffee_lots.csv"
ARGS = ["scan", str(DEMO), "--label", "grade", "--kernel", "linear", "--C", "1", "--folds", "3"]


def _run_with_terminal_stderr(args: list[str], out: Path) -> str:
    """Run with standard error on a pseudo-terminal; returns what the terminal showed."""
    leader, follower = pty.openpty()
    # A terminal of 24 rows by 100 columns, as a window would report.
    fcntl.ioctl(follower, termios.TIOCSWINSZ, struct.pack("HHHH", 24, 100, 0, 0))
    proc = subprocess.Popen(
        [sys.executable, "-m", "reviewer", *args, "--out", str(out)],
        cwd=ROOT,
        stdout=subprocess.DEVNULL,
        stderr=follower,
        env={**os.environ, "COLUMNS": "100"},
    )
    os.close(follower)
    chunks = []
    while True:
        try:
            data = os.read(leader, 4096)
        except OSError:  # the other end closed
            break
        if not data:
            break
        chunks.append(data)
    proc.wait(timeout=300)
    os.close(leader)
    assert proc.returncode == 0
    return b"".join(chunks).decode("utf-8", "replace")


def test_progress_appears_on_a_terminal_only(tmp_path: Path) -> None:
    shown = _run_with_terminal_stderr(ARGS, tmp_path / "a.csv")
    assert "%" in shown and "held-out fold" in shown
    piped = subprocess.run(
        [sys.executable, "-m", "reviewer", *ARGS, "--out", str(tmp_path / "b.csv")],
        cwd=ROOT, capture_output=True, text=True, check=True,
    )  # fmt: skip
    assert "%" not in piped.stderr and "rows: 1800" in piped.stderr
    quiet = _run_with_terminal_stderr([*ARGS, "--quiet"], tmp_path / "c.csv")
    assert "%" not in quiet and "rows:" not in quiet


def test_summary_json_has_the_documented_keys(tmp_path: Path) -> None:
    summary = tmp_path / "run.json"
    subprocess.run(
        [sys.executable, "-m", "reviewer", *ARGS, "--out", str(tmp_path / "r.csv"),
         "--summary", str(summary), "--quiet"],
        cwd=ROOT, check=True,
    )  # fmt: skip
    doc = json.loads(summary.read_text())
    documented = {
        "data", "label", "id", "rows", "fitted", "unlabelled", "classes", "zones", "supports",
        "settings", "heldout_accuracy", "heldout_balanced_accuracy", "columns", "vectors",
        "features", "feature_nonzeros", "notes", "out", "seconds",
    }  # fmt: skip
    assert set(doc) == documented
    assert doc["rows"] == 1800 and sum(doc["zones"].values()) == 1800
    assert (
        doc["settings"]["kernel"] == "linear" and doc["columns"]["origin_region"] == "categorical"
    )
