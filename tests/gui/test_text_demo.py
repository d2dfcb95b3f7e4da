"""`margin-reviewer demo --text` opens the work orders in the window, on a per-user copy."""

from __future__ import annotations

from pathlib import Path

import pytest

from reviewer.cli import main
from reviewer.gui import app as gui_app
from reviewer.gui.main_window import MainWindow


@pytest.fixture
def user_data(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    # platformdirs reads XDG_DATA_HOME when asked, so the copy lands here, not in the tester's
    # own data folder.
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    monkeypatch.chdir(tmp_path)
    return tmp_path / "data"


def test_demo_text_opens_the_work_orders_on_a_copy(qtbot, user_data, monkeypatch) -> None:
    opened: list[MainWindow] = []

    def run_window(path, **kw) -> int:
        # What run_window does before handing over to the event loop.
        window = gui_app.build_window(path, **kw)
        qtbot.addWidget(window)
        window.show()
        opened.append(window)
        return 0

    monkeypatch.setattr(gui_app, "run_window", run_window)
    assert main(["demo", "--text"]) == 0
    (win,) = opened
    qtbot.waitUntil(lambda: win.session is not None, timeout=120_000)
    s = win.session
    assert s.n_rows == 3000
    assert s.roles.label == "trade" and s.roles.id == "order_id"
    # The demo works on a copy in the user data folder; the shipped file stays untouched.
    assert Path(s.loaded.source.path).resolve().is_relative_to(user_data.resolve())
    assert Path(s.loaded.source.path).name == "work_orders.csv"
    # The first fit has started by itself; stop it, the opening is what is checked here.
    win.cancel_fit()
    qtbot.waitUntil(lambda: not win.runner.is_running, timeout=180_000)
    win.close()
