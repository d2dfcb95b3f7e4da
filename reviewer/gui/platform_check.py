"""Can Qt's window system plugin load here? Asked before any QApplication exists.

Qt aborts the whole process when its platform plugin cannot load, with a message that does
not name the Debian packages to install. So the window checks first, without loading Qt's
GUI libraries in this process: ``ldd`` on the xcb plugin lists the shared libraries the
dynamic loader cannot find, the xcb cursor library (which Qt opens by name at run time) is
looked up separately, and a short-lived child process creates a QApplication to catch
anything else. ``python -m reviewer.gui.platform_check --install`` is what ``make demo``
runs: it installs the missing packages with apt-get when it runs as root, and otherwise
stops with one line naming the packages and the command.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import shutil
import subprocess
import sys
from pathlib import Path

from reviewer.core.errors import ReviewerError

#: Shared library (soname) -> the Debian package that ships it, for the libraries Qt's
#: xcb plugin and the PySide6 widgets depend on (read off ``ldd`` of the plugin).
DEBIAN_PACKAGES: dict[str, str] = {
    "libxcb-cursor.so.0": "libxcb-cursor0",
    "libxcb-icccm.so.4": "libxcb-icccm4",
    "libxcb-keysyms.so.1": "libxcb-keysyms1",
    "libxcb-image.so.0": "libxcb-image0",
    "libxcb-render-util.so.0": "libxcb-render-util0",
    "libxcb-shape.so.0": "libxcb-shape0",
    "libxcb-xinerama.so.0": "libxcb-xinerama0",
    "libxcb-randr.so.0": "libxcb-randr0",
    "libxcb-xkb.so.1": "libxcb-xkb1",
    "libxcb-xfixes.so.0": "libxcb-xfixes0",
    "libxcb-shm.so.0": "libxcb-shm0",
    "libxcb-sync.so.1": "libxcb-sync1",
    "libxcb-render.so.0": "libxcb-render0",
    "libxcb-util.so.1": "libxcb-util1",
    "libxcb-glx.so.0": "libxcb-glx0",
    "libxcb-xinput.so.0": "libxcb-xinput0",
    "libxcb.so.1": "libxcb1",
    "libX11-xcb.so.1": "libx11-xcb1",
    "libX11.so.6": "libx11-6",
    "libSM.so.6": "libsm6",
    "libICE.so.6": "libice6",
    "libxkbcommon-x11.so.0": "libxkbcommon-x11-0",
    "libxkbcommon.so.0": "libxkbcommon0",
    "libEGL.so.1": "libegl1",
    "libGL.so.1": "libgl1",
    "libOpenGL.so.0": "libopengl0",
    "libGLX.so.0": "libglx0",
    "libfontconfig.so.1": "libfontconfig1",
    "libfreetype.so.6": "libfreetype6",
    "libdbus-1.so.3": "libdbus-1-3",
    "libglib-2.0.so.0": "libglib2.0-0",
}

#: Opened by name when the xcb plugin starts (Qt 6.5 and later), so ``ldd`` does not list it.
RUNTIME_LIBRARIES = ("libxcb-cursor.so.0",)

_PROBE = "from PySide6.QtWidgets import QApplication; QApplication(['probe'])"


class WindowCannotStart(ReviewerError):
    """The window system cannot show a window here; the message says why and what to do."""


def pyside_dir() -> Path | None:
    """Folder of the installed PySide6 package, found without importing it."""
    spec = importlib.util.find_spec("PySide6")
    if spec is None or not spec.submodule_search_locations:
        return None
    return Path(next(iter(spec.submodule_search_locations)))


def _ldd_missing(paths: list[Path]) -> set[str]:
    if shutil.which("ldd") is None:
        return set()
    missing: set[str] = set()
    for path in paths:
        if not path.is_file():
            continue
        try:
            out = subprocess.run(
                ["ldd", str(path)], capture_output=True, text=True, timeout=30, check=False
            ).stdout
        except (OSError, subprocess.SubprocessError):
            continue
        for line in out.splitlines():
            name, sep, where = line.strip().partition("=>")
            if sep and "not found" in where:
                missing.add(name.strip())
    return missing


def _loader_knows(soname: str) -> bool:
    try:
        out = subprocess.run(
            ["ldconfig", "-p"], capture_output=True, text=True, timeout=30, check=False
        ).stdout
    except (OSError, subprocess.SubprocessError):
        return True  # cannot tell: let the probe decide
    return any(line.strip().startswith(soname + " ") for line in out.splitlines())


def missing_libraries() -> list[str]:
    """Sonames the xcb plugin (or the widgets) need and the dynamic loader cannot find."""
    if not sys.platform.startswith("linux"):
        return []
    base = pyside_dir()
    if base is None:
        return []
    targets = [
        base / "Qt" / "plugins" / "platforms" / "libqxcb.so",
        base / "Qt" / "lib" / "libQt6XcbQpa.so.6",
        *sorted(base.glob("QtWidgets*.so")),
    ]
    missing = _ldd_missing(targets)
    if (base / "Qt" / "plugins" / "platforms" / "libqxcb.so").is_file():
        missing |= {name for name in RUNTIME_LIBRARIES if not _loader_knows(name)}
    return sorted(missing)


def packages_for(sonames: list[str]) -> list[str]:
    """Debian packages for ``sonames``; an unknown library is named as it is."""
    return sorted({DEBIAN_PACKAGES.get(name, name) for name in sonames})


def install_command(packages: list[str]) -> str:
    return "sudo apt-get install -y " + " ".join(packages)


def _wants_xcb() -> bool:
    platform = os.environ.get("QT_QPA_PLATFORM", "")
    if platform:
        return platform.split(":")[0].split(";")[0] == "xcb"
    return sys.platform.startswith("linux") and not os.environ.get("WAYLAND_DISPLAY")


def probe(timeout: float = 60.0) -> str | None:
    """Start a QApplication in a child process; None when it works, else the reason in one
    line (the child may abort; this process does not)."""
    try:
        done = subprocess.run(
            [sys.executable, "-c", _PROBE],
            capture_output=True,
            text=True,
            timeout=timeout,
            check=False,
        )
    except subprocess.TimeoutExpired:
        return f"starting Qt took longer than {timeout:.0f} s"
    except OSError as exc:
        return f"could not start Python to check Qt ({exc})"
    if done.returncode == 0:
        return None
    lines = [line.strip() for line in done.stderr.splitlines() if line.strip()]
    # Qt's own explanation is the line that names the plugin; fall back to the last line.
    useful = [line for line in lines if "plugin" in line.lower() or "display" in line.lower()]
    reason = (useful or lines or [f"Qt exited with status {done.returncode}"])[0]
    return " ".join(reason.split())


def check_window_can_start(*, run_probe: bool = True) -> None:
    """Raise WindowCannotStart with one line saying why no window can open here.

    Skipped for Qt platforms other than xcb (offscreen tests, Wayland, Windows, macOS) except
    for the child-process probe, which applies everywhere.
    """
    if _wants_xcb():
        missing = missing_libraries()
        if missing:
            packages = packages_for(missing)
            raise WindowCannotStart(
                "the window cannot start: Qt's xcb platform plugin needs "
                f"{', '.join(missing)}; install them with: {install_command(packages)}"
            )
        if not os.environ.get("DISPLAY"):
            raise WindowCannotStart(
                "the window cannot start: no X display (DISPLAY is not set); run it in a "
                "desktop session, or use `margin-reviewer scan` on the command line"
            )
    if run_probe:
        reason = probe()
        if reason is not None:
            raise WindowCannotStart(f"the window cannot start: {reason}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m reviewer.gui.platform_check",
        description="Check that Qt's xcb platform plugin can load; list what is missing.",
    )
    parser.add_argument(
        "--install",
        action="store_true",
        help="install the missing Debian packages with apt-get when running as root",
    )
    args = parser.parse_args(argv)
    missing = missing_libraries()
    if not missing:
        return 0
    packages = packages_for(missing)
    can_install = (
        args.install
        and hasattr(os, "geteuid")
        and os.geteuid() == 0
        and shutil.which("apt-get") is not None
        and all(p in DEBIAN_PACKAGES.values() for p in packages)
    )
    if can_install:
        sys.stderr.write(f"installing what Qt's window plugin needs: {' '.join(packages)}\n")
        env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
        quiet = {"env": env, "check": False, "stdout": subprocess.DEVNULL}
        subprocess.run(["apt-get", "update", "-qq"], **quiet)  # type: ignore[call-overload]
        subprocess.run(["apt-get", "install", "-y", "-qq", *packages], **quiet)  # type: ignore[call-overload]
        missing = missing_libraries()
        if not missing:
            return 0
        packages = packages_for(missing)
    sys.stderr.write(
        f"error: Qt's window plugin needs {' '.join(packages)}; "
        f"install them with: {install_command(packages)}\n"
    )
    return 1


if __name__ == "__main__":
    sys.exit(main())
