"""Before the window starts: a missing system library or display is one `error:` line that
names the Debian packages and the command, never Qt's abort."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from reviewer.gui import platform_check
from reviewer.gui.platform_check import WindowCannotStart


def test_missing_libraries_are_named_with_their_packages(monkeypatch):
    monkeypatch.setenv("QT_QPA_PLATFORM", "xcb")
    monkeypatch.setattr(
        platform_check, "missing_libraries", lambda: ["libxcb-cursor.so.0", "libxcb-icccm.so.4"]
    )
    with pytest.raises(WindowCannotStart) as info:
        platform_check.check_window_can_start(run_probe=False)
    text = str(info.value)
    assert "\n" not in text
    assert "sudo apt-get install -y libxcb-cursor0 libxcb-icccm4" in text


def test_no_display_says_so(monkeypatch):
    monkeypatch.setenv("QT_QPA_PLATFORM", "xcb")
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.setattr(platform_check, "missing_libraries", lambda: [])
    with pytest.raises(WindowCannotStart, match="no X display"):
        platform_check.check_window_can_start(run_probe=False)


def test_make_demo_check_stops_with_one_line_when_it_cannot_install(monkeypatch, capsys):
    monkeypatch.setattr(platform_check, "missing_libraries", lambda: ["libxcb-keysyms.so.1"])
    monkeypatch.setattr(os, "geteuid", lambda: 1000)  # not root: nothing is installed
    assert platform_check.main(["--install"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [
        "error: Qt's window plugin needs libxcb-keysyms1; "
        "install them with: sudo apt-get install -y libxcb-keysyms1"
    ]


def test_every_package_named_for_the_plugin_is_a_debian_name():
    # Debian package names: lower case, digits, + - . only (Debian Policy 5.6.1).
    import re

    for soname, package in platform_check.DEBIAN_PACKAGES.items():
        assert soname.startswith("lib") and ".so." in soname
        assert re.fullmatch(r"[a-z0-9][a-z0-9+.-]+", package), package


@pytest.mark.parametrize("display", [None, ":197"])
def test_demo_without_a_display_prints_one_error_line(tmp_path, display):
    # No DISPLAY at all, and a DISPLAY no X server answers (Qt itself would abort there).
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY")}
    if display:
        env["DISPLAY"] = display
    env["QT_QPA_PLATFORM"] = "xcb"
    env["HOME"] = str(tmp_path)
    env["XDG_DATA_HOME"] = str(tmp_path / "data")
    done = subprocess.run(
        [sys.executable, "-m", "reviewer", "demo"],
        capture_output=True,
        text=True,
        timeout=120,
        env=env,
        check=False,
    )
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2, done.stderr
    assert len(lines) == 1 and lines[0].startswith("error: the window cannot start"), lines
    assert "Aborted" not in done.stderr
