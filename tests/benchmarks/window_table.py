"""How fast the review list shows and re-sorts a large table (offscreen).

Measures, median of 3:
- show: build an ArrayTableModel of N rows x 8 columns, put it in a QTableView, show it
  and let the first paint finish;
- re-sort: sort by another column (numpy argsort + layoutChanged) and repaint.
For comparison, in the same run and once: QSortFilterProxyModel sorting rows of a
QStandardItemModel, and the same proxy over our own model (where every comparison calls
back into Python), at a bounded size.

    python -m tests.benchmarks.window_table                # 1,000,000 rows, proxies at 100,000
    python -m tests.benchmarks.window_table --smoke --out-dir /tmp/x   # 10,000 rows, tiny proxies
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import PySide6
from PySide6.QtCore import QSortFilterProxyModel, Qt
from PySide6.QtGui import QStandardItem, QStandardItemModel
from PySide6.QtWidgets import QApplication, QTableView

from reviewer.gui.table_model import ArrayTableModel, ColumnSpec

RESULTS = Path(__file__).resolve().parent / "results"
REPEATS = 3


def make_columns(n: int, seed: int = 0) -> list[ColumnSpec]:
    """Eight columns shaped like a scan table: ids, labels, margins, slacks, zones, ranks."""
    rng = np.random.default_rng(seed)
    margin = rng.normal(1.0, 1.0, n)
    slack = np.maximum(0.0, 1.0 - margin)
    heldout = np.maximum(0.0, 1.0 - (margin + rng.normal(0, 0.3, n)))
    heldout[rng.random(n) < 0.01] = np.nan
    labels = np.array(["north", "south", "east", "west"], dtype=object)[rng.integers(0, 4, n)]
    zones = np.where(slack > 1, "wrong_side", np.where(slack > 0, "inside_margin", "clear"))
    return [
        ColumnSpec("row_id", "Row", np.arange(n, dtype=np.int64)),
        ColumnSpec("label", "Label", labels),
        ColumnSpec("model_label", "Model's label", labels[::-1].copy()),
        ColumnSpec("margin", "Margin", margin),
        ColumnSpec("slack", "Slack", slack),
        ColumnSpec("heldout_slack", "Held-out slack", heldout),
        ColumnSpec("zone", "Zone", zones.astype(object)),
        ColumnSpec("alpha", "Alpha", rng.random(n)),
    ]


def paint(app: QApplication, view: QTableView) -> None:
    app.processEvents()
    view.viewport().repaint()  # synchronous: returns after the visible cells are drawn
    app.processEvents()


def time_show(app: QApplication, n: int) -> tuple[float, ArrayTableModel, QTableView]:
    cols = make_columns(n)  # data generation is not part of what a reviewer waits for
    t0 = time.perf_counter()
    model = ArrayTableModel(cols)
    view = QTableView()
    view.setSortingEnabled(False)
    view.setModel(model)
    view.resize(1000, 700)
    view.show()
    paint(app, view)
    elapsed = time.perf_counter() - t0
    # A fast time for a list that lost its rows would be a lie; check before reporting it.
    assert model.rowCount() == n, f"model shows {model.rowCount()} rows, expected {n}"
    return elapsed, model, view


def time_resorts(app: QApplication, model: ArrayTableModel, view: QTableView) -> list[float]:
    # A different float column each time, so no run re-uses the previous order.
    plan = [("slack", True), ("margin", False), ("heldout_slack", True)]
    times = []
    for key, desc in plan[:REPEATS]:
        t0 = time.perf_counter()
        model.sort_by(key, descending=desc)
        paint(app, view)
        times.append(time.perf_counter() - t0)
    return times


def time_proxy_standard(app: QApplication, n: int) -> float:
    """QSortFilterProxyModel over a QStandardItemModel (2 columns), one sort, timed."""
    rng = np.random.default_rng(1)
    values = rng.random(n)
    source = QStandardItemModel(n, 2)
    for r in range(n):
        source.setItem(r, 0, QStandardItem(str(r)))
        item = QStandardItem()
        item.setData(float(values[r]), Qt.ItemDataRole.DisplayRole)
        source.setItem(r, 1, item)
    proxy = QSortFilterProxyModel()
    proxy.setSourceModel(source)
    view = QTableView()
    view.setModel(proxy)
    view.resize(600, 400)
    view.show()
    paint(app, view)
    t0 = time.perf_counter()
    proxy.sort(1, Qt.SortOrder.DescendingOrder)
    paint(app, view)
    elapsed = time.perf_counter() - t0
    view.close()
    return elapsed


def time_proxy_python(app: QApplication, n: int) -> float:
    """The same proxy over an ArrayTableModel: each comparison calls data() in Python."""
    model = ArrayTableModel(make_columns(n, seed=2))
    proxy = QSortFilterProxyModel()
    proxy.setSourceModel(model)
    view = QTableView()
    view.setModel(proxy)
    view.resize(600, 400)
    view.show()
    paint(app, view)
    t0 = time.perf_counter()
    proxy.sort(model.column_index("slack"), Qt.SortOrder.DescendingOrder)
    paint(app, view)
    elapsed = time.perf_counter() - t0
    view.close()
    return elapsed


def summary(runs: list[float]) -> dict[str, object]:
    return {"runs": [round(t, 4) for t in runs], "median": round(statistics.median(runs), 4)}


def write(out_dir: Path, data: dict) -> None:
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "window_table.json").write_text(json.dumps(data, indent=2) + "\n")
    lines = [
        "# Review list: show and re-sort time",
        "",
        f"- cores: {data['cores']}",
        f"- PySide6: {data['pyside6']}",
        f"- Python: {data['python']} ({data['platform']}), Qt platform: {data['qt_platform']}",
        f"- mode: {data['mode']}",
        "",
        "| what | rows | median s | runs s |",
        "|---|---:|---:|---|",
        f"| ArrayTableModel: build + show + first paint | {data['rows']:,} x {data['columns']} "
        f"| {data['show_seconds']['median']:.3f} | {data['show_seconds']['runs']} |",
        f"| ArrayTableModel: re-sort by another column + repaint | {data['rows']:,} "
        f"| {data['resort_seconds']['median']:.3f} | {data['resort_seconds']['runs']} |",
    ]
    for p in data["proxy"]:
        lines.append(
            f"| QSortFilterProxyModel over {p['source']}: one sort + repaint | "
            f"{p['rows']:,} | {p['sort_seconds']:.3f} | once |"
        )
    lines += [
        "",
        "Show and re-sort: median of 3 in one process. Proxy sorts: measured once, at a",
        "bounded size, in the same run. Sorting in numpy hands the view one index array;",
        "the proxy compares cells one pair at a time through the item-model interface.",
        "",
    ]
    (out_dir / "window_table.md").write_text("\n".join(lines))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--smoke", action="store_true", help="10,000 rows, tiny proxy sorts")
    parser.add_argument("--rows", type=int, default=None, help="rows for our model")
    parser.add_argument("--proxy-rows", type=int, default=None, help="rows for the proxy sorts")
    parser.add_argument("--out-dir", type=Path, default=RESULTS)
    args = parser.parse_args(argv)
    n = args.rows or (10_000 if args.smoke else 1_000_000)
    n_proxy = args.proxy_rows or (1_000 if args.smoke else 100_000)

    app = QApplication.instance() or QApplication(sys.argv[:1])
    shows: list[float] = []
    for i in range(REPEATS):
        elapsed, model, view = time_show(app, n)
        shows.append(elapsed)
        if i < REPEATS - 1:
            view.close()
            view.deleteLater()
            del model, view
            app.processEvents()
    resorts = time_resorts(app, model, view)
    view.close()
    del model, view

    proxy = [
        {"source": "QStandardItemModel", "rows": n_proxy,
         "sort_seconds": round(time_proxy_standard(app, n_proxy), 4)},
        {"source": "ArrayTableModel (Python data())", "rows": n_proxy,
         "sort_seconds": round(time_proxy_python(app, n_proxy), 4)},
    ]  # fmt: skip
    data = {
        "cores": os.cpu_count(),
        "pyside6": PySide6.__version__,
        "python": platform.python_version(),
        "platform": platform.platform(),
        "qt_platform": os.environ.get("QT_QPA_PLATFORM", ""),
        "mode": "smoke" if args.smoke else "full",
        "rows": n,
        "columns": 8,
        "show_seconds": summary(shows),
        "resort_seconds": summary(resorts),
        "proxy": proxy,
    }
    write(args.out_dir, data)
    print((args.out_dir / "window_table.md").read_text())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
