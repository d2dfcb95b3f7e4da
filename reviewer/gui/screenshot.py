"""``python -m reviewer.gui.screenshot OUT.png``: the demo after its first fit, top row selected.

Works on a copy of the demo file in a temporary folder, so no session file is left behind.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

from PySide6.QtCore import QEventLoop, QTimer

from reviewer.gui.app import demo_copy, make_app
from reviewer.gui.main_window import MainWindow

DEMO = Path(__file__).resolve().parents[1] / "demo_data" / "coffee_lots.csv"


def _wait(app, until, seconds: float) -> bool:
    loop_steps = int(seconds * 20)
    for _ in range(loop_steps):
        if until():
            return True
        loop = QEventLoop()
        QTimer.singleShot(50, loop.quit)
        loop.exec()
    return until()


def main(argv: list[str]) -> int:
    if len(argv) != 1:
        sys.stderr.write("usage: python -m reviewer.gui.screenshot OUT.png\n")
        return 2
    out = Path(argv[0])
    app = make_app()
    with tempfile.TemporaryDirectory() as tmp:
        data = demo_copy(DEMO, Path(tmp))
        window = MainWindow()
        window.resize(1500, 920)
        window.show()
        window.open_session(data, "grade", "lot_id")
        ok = _wait(
            app,
            lambda: (
                window.session is not None
                and window.session.latest is not None
                and not window.runner.is_running
            ),
            300,
        )
        if not ok:
            sys.stderr.write("the first fit did not finish in time\n")
            return 1
        window.select_row(window.model.source_row(0))
        _wait(app, lambda: False, 0.5)
        window.grab().save(str(out))
        window.close()
    print(out)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
