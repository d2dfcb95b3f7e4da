"""`make bench` finds every benchmark script, so a new one cannot be left out of it."""

from __future__ import annotations

from tests.benchmarks.run_all import HERE, scripts


def test_every_script_with_a_smoke_mode_is_run() -> None:
    found = set(scripts())
    expected = {
        p.stem
        for p in HERE.glob("*.py")
        if not p.name.startswith(("test_", "_", "run_all")) and "--smoke" in p.read_text()
    }
    assert found == expected
    assert {"detection", "speed", "replay", "window_session"} <= found
