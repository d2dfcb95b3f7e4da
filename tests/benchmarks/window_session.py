"""How long the real review window takes to show a one-million-row session, and to sort it.

Set-up (timed, not the point): a 1,000,000-row, 20-feature CSV is written to a temporary
folder, a session is opened and fitted (linear, held-out folds off) and closed. Then, as a
reviewer resuming work would see it:

- reopen: ReviewSession.open on the file (load, features, saved fit read back), then
  prepare_views (projection, class norms), both on the window's opening worker;
- show: MainWindow.set_session + show + first paint processed;
- sort: click-equivalent sort of the list by slack, then by given label, with a repaint.

    python -m tests.benchmarks.window_session [--smoke] [--out-dir DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import tempfile
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pandas as pd
import PySide6

RESULTS = Path(__file__).resolve().parent / "results"


def write_table(folder: Path, n: int, seed: int = 0) -> Path:
    """Synthetic, for timing only: 20 numeric features, a two-class label, an id."""
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((n, 20)).round(4)
    y = np.where(X[:, :5].sum(axis=1) + rng.standard_normal(n) > 0, "confirm", "drop")
    frame = pd.DataFrame(X, columns=[f"f{i}" for i in range(20)])
    frame.insert(0, "item", [f"I{i:07d}" for i in range(n)])
    frame["verdict"] = y
    path = folder / "items.csv"
    frame.to_csv(path, index=False)
    return path


def measure(n: int) -> dict:
    from PySide6.QtWidgets import QApplication

    from reviewer.core.review.session import ReviewSession
    from reviewer.core.values import FitSettings
    from reviewer.gui.app import make_app
    from reviewer.gui.main_window import MainWindow

    out: dict = {"rows": n}
    with tempfile.TemporaryDirectory() as tmp:
        t = time.perf_counter()
        path = write_table(Path(tmp), n)
        out["write_csv_s"] = time.perf_counter() - t
        t = time.perf_counter()
        with ReviewSession.open(path, label="verdict", id_column="item") as s:
            s.fit(FitSettings(kernel="linear", C=1.0, folds=0))
        out["first_open_and_fit_s"] = time.perf_counter() - t

        app = make_app()
        t = time.perf_counter()
        session = ReviewSession.open(path)
        out["reopen_s"] = time.perf_counter() - t
        # The window's opening worker computes these before handing the session over
        # (gui/tasks.open_on_worker), so they are part of opening, not of the first paint.
        t = time.perf_counter()
        session.prepare_views()
        out["prepare_views_s"] = time.perf_counter() - t
        window = MainWindow(auto_fit=False)
        window.resize(1400, 900)
        t = time.perf_counter()
        window.set_session(session)
        window.show()
        app.processEvents()
        out["show_s"] = time.perf_counter() - t
        assert window.model.rowCount() == n
        for key in ("slack", "label"):
            t = time.perf_counter()
            window.model.sort_by(key, descending=(key == "slack"))
            window.table.viewport().repaint()
            QApplication.processEvents()
            out[f"sort_by_{key}_s"] = time.perf_counter() - t
        window.close()
        app.processEvents()
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--smoke", action="store_true", help="20,000 rows")
    parser.add_argument("--out-dir", type=Path, default=RESULTS)
    args = parser.parse_args(argv)
    n = 20_000 if args.smoke else 1_000_000
    result = measure(n)
    header = {
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "pyside6": PySide6.__version__,
        "load_average": os.getloadavg()[0],
    }
    name = "window_session_smoke" if args.smoke else "window_session"
    args.out_dir.mkdir(parents=True, exist_ok=True)
    (args.out_dir / f"{name}.json").write_text(
        json.dumps({"machine": header, "result": result}, indent=2)
    )
    lines = [
        "# The review window on a large session",
        "",
        f"{header['cores']} cores, Python {header['python']}, PySide6 {header['pyside6']}, "
        f"offscreen; load average {header['load_average']:.1f} at the end (shared machine). "
        "One run.",
        "",
        f"{n:,} rows x 20 features, two classes, linear fit saved in the session.",
        "",
        "| step | seconds |",
        "|---|---:|",
        f"| set-up: write the CSV | {result['write_csv_s']:.2f} |",
        f"| set-up: first open + fit (linear, folds off) | {result['first_open_and_fit_s']:.2f} |",
        f"| reopen the session (load, features, saved fit) | {result['reopen_s']:.2f} |",
        "| on the same worker: projection and class norms (prepare_views) | "
        f"{result['prepare_views_s']:.2f} |",
        f"| show it in the window (set_session, show, first paint) | {result['show_s']:.2f} |",
        f"| sort the list by slack, repaint | {result['sort_by_slack_s']:.2f} |",
        f"| sort the list by given label, repaint | {result['sort_by_label_s']:.2f} |",
    ]
    (args.out_dir / f"{name}.md").write_text("\n".join(lines) + "\n")
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
