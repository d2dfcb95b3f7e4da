"""Where the window's panels sit: docks, the status line, the first size, the saved layout.

Every panel is a dock that can be collapsed, tabbed or undocked. The layout is saved with
QMainWindow.saveState when the window closes and restored the next time; the first window
never exceeds the screen's available area.
"""

from __future__ import annotations

from collections.abc import Sequence

from PySide6.QtCore import QByteArray, Qt, QTimer
from PySide6.QtGui import QGuiApplication
from PySide6.QtWidgets import QDockWidget, QMainWindow, QStatusBar, QWidget

from reviewer.core import values
from reviewer.core.door import ReviewSession
from reviewer.core.values import display_name
from reviewer.gui import dialogs
from reviewer.gui.widgets import ElidedLabel

#: Bumped when the docks change, so a layout saved by an older version is not restored.
LAYOUT_VERSION = 2
DEFAULT_SIZE = (1440, 900)
GEOMETRY_KEY = "layout/geometry"
STATE_KEY = "layout/state"
#: Starting widths of the settings and plots docks, and height of the row dock (pixels).
SIDE_WIDTHS = (230, 430)
ROW_HEIGHT = 250


def make_dock(title: str, name: str, widget: QWidget, parent: QMainWindow) -> QDockWidget:
    dock = QDockWidget(title, parent)
    dock.setObjectName(name)
    dock.setWidget(widget)
    dock.setFeatures(
        QDockWidget.DockWidgetFeature.DockWidgetMovable
        | QDockWidget.DockWidgetFeature.DockWidgetFloatable
        | QDockWidget.DockWidgetFeature.DockWidgetClosable
    )
    return dock


def prepare(window: QMainWindow) -> None:
    """Dock options and corners: settings the full height on the left, the row panel along
    the bottom under the list and the plots."""
    window.setDockOptions(
        QMainWindow.DockOption.AnimatedDocks
        | QMainWindow.DockOption.AllowTabbedDocks
        | QMainWindow.DockOption.AllowNestedDocks
    )
    window.setCorner(Qt.Corner.BottomLeftCorner, Qt.DockWidgetArea.LeftDockWidgetArea)
    window.setCorner(Qt.Corner.TopLeftCorner, Qt.DockWidgetArea.LeftDockWidgetArea)
    window.setCorner(Qt.Corner.BottomRightCorner, Qt.DockWidgetArea.BottomDockWidgetArea)


def default_sizes(window: QMainWindow, sides: Sequence[QDockWidget], row: QDockWidget) -> None:
    window.resizeDocks(list(sides), list(SIDE_WIDTHS), Qt.Orientation.Horizontal)
    window.resizeDocks([row], [ROW_HEIGHT], Qt.Orientation.Vertical)


def restore(window: QMainWindow) -> bool:
    """Geometry and dock layout saved by an earlier run; True when one was restored."""
    store = dialogs.app_settings()
    geometry = store.value(GEOMETRY_KEY)
    state = store.value(STATE_KEY)
    if isinstance(geometry, QByteArray) and not geometry.isEmpty():
        window.restoreGeometry(geometry)
    if isinstance(state, QByteArray) and not state.isEmpty():
        return bool(window.restoreState(state, LAYOUT_VERSION))
    return False


def save(window: QMainWindow) -> None:
    store = dialogs.app_settings()
    store.setValue(GEOMETRY_KEY, window.saveGeometry())
    store.setValue(STATE_KEY, window.saveState(LAYOUT_VERSION))


def fit_to_screen(window: QWidget) -> None:
    """Keep the window inside its screen's available area (never larger than it)."""
    screen = window.screen() or QGuiApplication.primaryScreen()
    if screen is None:
        return
    area = screen.availableGeometry()
    frame = window.frameGeometry()
    extra_w = max(0, frame.width() - window.width())
    extra_h = max(0, frame.height() - window.height())
    w = min(window.width(), area.width() - extra_w)
    h = min(window.height(), area.height() - extra_h)
    if (w, h) != (window.width(), window.height()):
        window.resize(w, h)
    frame = window.frameGeometry()
    x = min(max(frame.x(), area.x()), area.right() - frame.width() + 1)
    y = min(max(frame.y(), area.y()), area.bottom() - frame.height() + 1)
    if (x, y) != (frame.x(), frame.y()):
        window.move(x, y)


class StatusLine:
    """The status bar's two parts, both eliding: passing notices on the left, the session's
    counts on the right (so neither can widen the window)."""

    def __init__(self, bar: QStatusBar) -> None:
        bar.setSizeGripEnabled(True)
        self.notice = ElidedLabel("")
        self.notice.setObjectName("notice_text")
        self.counts = ElidedLabel("")
        self.counts.setObjectName("status_text")
        self.counts.setAlignment(Qt.AlignmentFlag.AlignRight)
        bar.addPermanentWidget(self.notice, 2)
        bar.addPermanentWidget(self.counts, 3)
        self._timer = QTimer(bar)
        self._timer.setSingleShot(True)
        self._timer.timeout.connect(lambda: self.notice.setText(""))

    def say(self, message: str, msecs: int = 6000) -> None:
        self.notice.setText(message)
        self._timer.start(msecs)

    def show_session(self, s: ReviewSession | None) -> None:
        if s is None:
            self.counts.setText("Open a data file to begin (Ctrl+O).")
            return
        st = s.status()
        parts = [f"{st['rows']:,} rows"]
        zones = st.get("zones")
        if zones:
            parts.append(" / ".join(f"{zones.get(z, 0):,} {display_name(z)}" for z in values.ZONES))
        parts.append(f"{st['reviewed']:,} reviewed")
        parts.append(decision_counts(s))
        parts.append(str(st["session_file"]).rsplit("/", 1)[-1])
        parts.append("read-only" if st["read_only"] else "saved")
        if s.latest is None:
            parts.append("no fit yet")
        elif not st["fit_is_current"]:
            parts.append("⚠ fit is stale: refit (F5)")
        text = "  ·  ".join(parts)
        self.counts.setText(text)
        self.counts.setToolTip(text + "\nSession file: " + str(st["session_file"]))


def decision_counts(session: ReviewSession) -> str:
    """ "3 decisions (1 undone, 1 redone, 2 notes)": decisions are edits, not undo or redo."""
    counts = {name: 0 for name in values.ACTIONS}
    for e in session.events():
        counts[e.action] = counts.get(e.action, 0) + 1
    n = sum(counts[a] for a in values.EDIT_ACTIONS)
    text = f"{n:,} decision" + ("" if n == 1 else "s")
    extra = []
    for key, word in ((values.UNDO, "undone"), (values.REDO, "redone")):
        if counts[key]:
            extra.append(f"{counts[key]:,} {word}")
    notes = counts[values.NOTE]
    if notes:
        extra.append(f"{notes:,} note" + ("" if notes == 1 else "s"))
    return text + (f" ({', '.join(extra)})" if extra else "")
