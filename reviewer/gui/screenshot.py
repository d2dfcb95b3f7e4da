"""``python -m reviewer.gui.screenshot OUT.png [--views FOLDER] [--text TEXT.png]``: the demo
as a reviewer sees it.

The window at 1,366 x 768 (a common laptop screen) after its first fit, top row selected.
With ``--views`` it then takes the model's label on the five worst rows, refits, computes
the C curve and saves each plot view as ``view_<name>.png`` in FOLDER. With ``--text`` it
also shows the text demo (the work orders) after a linear fit, the top row's description
marked, and saves that window. Works on copies of the demo files in a temporary folder, so
no session file is left behind.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path

import numpy as np
from PySide6.QtCore import QEventLoop, QTimer

from reviewer.core.values import FitSettings
from reviewer.demo_data import COFFEE_DEMO_ROLES
from reviewer.gui.app import demo_copy, make_app
from reviewer.gui.main_window import MainWindow
from reviewer.gui.reporting import MessageLog

DEMO = Path(__file__).resolve().parents[1] / "demo_data" / "coffee_lots.csv"
TEXT_DEMO = Path(__file__).resolve().parents[1] / "demo_data" / "work_orders.csv"
#: The text demo's fit: the linear kernel (the usual one for TF-IDF), three folds to keep the
#: screenshot quick.
TEXT_SETTINGS = FitSettings(kernel="linear", C=1.0, folds=3, solver="exact")
SIZE = (1366, 768)
VIEW_SIZE = (900, 620)
VIEW_FILES = {
    "projection": "view_projection.png",
    "histogram": "view_slack.png",
    "c_curve": "view_c_curve.png",
    "compare": "view_compare.png",
}


def _wait(until: Callable[[], bool], seconds: float) -> bool:
    for _ in range(int(seconds * 20)):
        if until():
            return True
        loop = QEventLoop()
        QTimer.singleShot(50, loop.quit)
        loop.exec()
    return until()


def _fitted(window: MainWindow) -> Callable[[], bool]:
    return lambda: (
        window.session is not None
        and window.session.latest is not None
        and not window.runner.is_running
    )


def save_views(window: MainWindow, folder: Path) -> list[Path]:
    s = window.session
    assert s is not None and s.latest is not None
    wrong = np.flatnonzero(s.latest.rows["rank"].to_numpy() <= 5)
    s.take_model_label([int(r) for r in wrong], reason="label looks wrong")
    window.refit()
    if not _wait(_fitted(window), 300):
        raise RuntimeError("the refit did not finish in time")
    panel = window.views_panel
    panel.setCurrentWidget(panel.c_curve)
    panel.c_curve.start()
    if not _wait(lambda: not panel.c_curve.runner.is_running, 600):
        raise RuntimeError("the C curve did not finish in time")
    # Float the plots dock at a size of its own, so each view is drawn as large as in use.
    window.views_slot.setFloating(True)
    window.views_slot.resize(*VIEW_SIZE)
    _wait(lambda: False, 0.3)
    out = []
    for attr, name in VIEW_FILES.items():
        view = getattr(panel, attr)
        panel.setCurrentWidget(view)
        _wait(lambda: False, 0.4)
        path = folder / name
        view.grab().save(str(path))
        out.append(path)
    return out


def save_text_window(out: Path, folder: Path) -> Path:
    """The text demo after a linear fit, its top row current, saved to ``out``."""
    data = demo_copy(TEXT_DEMO, folder)
    window = MainWindow(reporter=MessageLog(), remember_layout=False, auto_fit=False)
    window.show()
    window.resize(*SIZE)
    window.open_session(data, "trade", "order_id")
    window.refit(TEXT_SETTINGS)
    if not _wait(_fitted(window), 900):
        raise RuntimeError("the text demo's fit did not finish in time")
    window.select_row(window.model.source_row(0))
    _wait(lambda: False, 0.5)
    window.grab().save(str(out))
    window.close()
    return out


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(prog="python -m reviewer.gui.screenshot")
    parser.add_argument("out", type=Path)
    parser.add_argument("--views", type=Path, default=None, help="folder for view_*.png")
    parser.add_argument("--text", type=Path, default=None, help="the text demo's window")
    args = parser.parse_args(argv)
    make_app()
    with tempfile.TemporaryDirectory() as tmp:
        data = demo_copy(DEMO, Path(tmp))
        window = MainWindow(reporter=MessageLog(), remember_layout=False)
        window.show()
        window.resize(*SIZE)
        window.open_session(data, "grade", "lot_id", overrides=dict(COFFEE_DEMO_ROLES))
        if not _wait(_fitted(window), 300):
            sys.stderr.write("the first fit did not finish in time\n")
            return 1
        window.select_row(window.model.source_row(0))
        _wait(lambda: False, 0.5)
        window.grab().save(str(args.out))
        print(args.out)
        if args.views is not None:
            for path in save_views(window, args.views):
                print(path)
        window.close()
        if args.text is not None:
            print(save_text_window(args.text, Path(tmp) / "text"))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
