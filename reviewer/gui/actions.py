"""Every action of the window as data: id, title, keys, icon, when it is enabled, what it calls.

The window builds its menus, toolbar and shortcuts from ``ACTIONS``, and the help panel lists
``help_rows()``, so the keys a reviewer reads are the keys that work.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

from PySide6.QtCore import QObject, Qt
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QMenu, QMenuBar, QToolBar

from reviewer.core.door import ReviewSession
from reviewer.gui import resources

Rule = Callable[[ReviewSession | None, bool], bool]
"""(session or None, a fit is running) -> enabled."""


def always(_s: ReviewSession | None, _busy: bool) -> bool:
    return True


def has_session(s: ReviewSession | None, _busy: bool) -> bool:
    return s is not None


def writable(s: ReviewSession | None, _busy: bool) -> bool:
    return s is not None and not s.read_only


def writable_fitted(s: ReviewSession | None, _busy: bool) -> bool:
    return s is not None and not s.read_only and s.latest is not None


def can_undo(s: ReviewSession | None, _busy: bool) -> bool:
    return s is not None and not s.read_only and s.can_undo


def can_redo(s: ReviewSession | None, _busy: bool) -> bool:
    return s is not None and not s.read_only and s.can_redo


def idle(s: ReviewSession | None, busy: bool) -> bool:
    return s is not None and not busy


def running(_s: ReviewSession | None, busy: bool) -> bool:
    return busy


@dataclass(frozen=True)
class ActionSpec:
    """One action. ``keys`` are portable key names (Ctrl is Cmd on a Mac); the first is the
    one menus show. ``slot`` names the window method called; ``args`` are passed to it.
    ``help`` is the help panel's line ("" leaves it out); ``help_keys`` overrides how its keys
    are written there (one line for a family such as 1 … 9)."""

    id: str
    title: str
    keys: tuple[str, ...]
    slot: str
    help: str = ""
    icon: str | None = None
    tip: str = ""
    menu: str = ""
    toolbar: bool = False
    enabled: Rule = always
    args: tuple[object, ...] = ()
    help_keys: str | None = None


MENUS = ("File", "Edit", "Decide", "Fit", "View", "Help")
"""Menu titles in menu-bar order (each with its mnemonic added by the builder)."""

ACTIONS: tuple[ActionSpec, ...] = (
    ActionSpec(
        "open",
        "&Open…",
        ("Ctrl+O",),
        "choose_file",
        "open a data file",
        "open",
        menu="File",
        toolbar=True,
    ),
    ActionSpec(
        "export",
        "&Export…",
        ("Ctrl+E",),
        "export_dialog",
        "export the cleaned file, the audit log and a report",
        "export",
        menu="File",
        toolbar=True,
        enabled=has_session,
    ),
    ActionSpec("quit", "&Quit", ("Ctrl+Q",), "close", menu="File"),
    ActionSpec(
        "undo",
        "&Undo",
        ("Ctrl+Z",),
        "undo",
        "undo the last decision",
        "undo",
        menu="Edit",
        toolbar=True,
        enabled=can_undo,
    ),
    ActionSpec(
        "redo",
        "&Redo",
        ("Ctrl+Shift+Z", "Ctrl+Y"),
        "redo",
        "redo",
        "redo",
        menu="Edit",
        toolbar=True,
        enabled=can_redo,
        help_keys="Ctrl+Shift+Z or Ctrl+Y",
    ),
    ActionSpec(
        "confirm",
        "&Confirm",
        ("C",),
        "confirm",
        "confirm: the label is right",
        "confirm",
        "Confirm: the label is right (C)",
        menu="Decide",
        toolbar=True,
        enabled=writable,
    ),
    ActionSpec(
        "take_model",
        "Take &model's label",
        ("M",),
        "take_model_label",
        "take the model's label",
        "take_model",
        "Relabel to the model's label (M)",
        menu="Decide",
        toolbar=True,
        enabled=writable_fitted,
    ),
    ActionSpec(
        "relabel",
        "&Relabel…",
        ("R",),
        "relabel_pick",
        "relabel: pick a class or type a new name",
        "relabel",
        "Relabel to a class or a new name (R)",
        menu="Decide",
        toolbar=True,
        enabled=writable,
    ),
    *(
        ActionSpec(
            f"relabel_{i}",
            f"Relabel to class {i}",
            (str(i),),
            "relabel_number",
            "relabel to class N (numbers shown under the list)" if i == 1 else "",
            menu="Decide",
            enabled=writable,
            args=(i,),
            help_keys="1 … 9",
        )
        for i in range(1, 10)
    ),
    ActionSpec(
        "exclude",
        "E&xclude",
        ("X",),
        "exclude",
        "exclude the row from the fit and the cleaned file",
        "exclude",
        "Exclude (X)",
        menu="Decide",
        toolbar=True,
        enabled=writable,
    ),
    ActionSpec(
        "restore",
        "Re&store",
        ("Shift+X",),
        "restore",
        "restore an excluded row",
        "restore",
        "Restore (Shift+X)",
        menu="Decide",
        toolbar=True,
        enabled=writable,
    ),
    ActionSpec(
        "note",
        "Add &note…",
        ("N",),
        "add_note",
        "add a note (changes nothing)",
        tip="Add a note (N)",
        menu="Decide",
        enabled=writable,
    ),
    ActionSpec(
        "refit",
        "Re&fit",
        ("F5", "Ctrl+R"),
        "refit",
        "refit with the fit settings",
        "refit",
        "Refit (F5)",
        menu="Fit",
        toolbar=True,
        enabled=idle,
        help_keys="F5 or Ctrl+R",
    ),
    ActionSpec(
        "cancel",
        "&Cancel fit",
        ("Esc",),
        "cancel_fit",
        "cancel a running fit (the previous fit stays)",
        menu="Fit",
        enabled=running,
    ),
    ActionSpec(
        "find",
        "&Find id",
        ("Ctrl+F",),
        "focus_find",
        "jump to the id filter (Down goes back to the list)",
        menu="View",
    ),
    ActionSpec(
        "reset_layout",
        "Reset &layout",
        (),
        "reset_layout",
        "put the panels back where they started",
        menu="View",
    ),
    ActionSpec("help", "&Keys and caution", ("F1",), "show_help", "this help", menu="Help"),
)

NAVIGATION: tuple[tuple[str, str], ...] = (
    ("Up / Down, Page Up / Page Down", "move through the list"),
    ("Shift+click, Ctrl+click, Shift+Up/Down", "select several rows (a decision applies to all)"),
)
"""Keys the list itself handles (not actions), listed first in the help panel."""


def spec(action_id: str) -> ActionSpec:
    for a in ACTIONS:
        if a.id == action_id:
            return a
    raise KeyError(f"no action {action_id!r}")


def key_text(a: ActionSpec) -> str:
    if a.help_keys:
        return a.help_keys
    if not a.keys:
        return f"{a.menu} menu: {a.title.replace('&', '')}"
    return " or ".join(
        QKeySequence(k).toString(QKeySequence.SequenceFormat.NativeText) for k in a.keys
    )


def help_rows(actions: Sequence[ActionSpec] = ACTIONS) -> list[tuple[str, str]]:
    """(keys, what they do) for the help panel: navigation, then every action with help."""
    return [*NAVIGATION, *((key_text(a), a.help) for a in actions if a.help)]


def build_actions(owner: QObject, target: object) -> dict[str, QAction]:
    """One QAction per spec, parented to ``owner``, calling ``target.<slot>(*args)``."""
    out: dict[str, QAction] = {}
    for a in ACTIONS:
        act = QAction(a.title, owner)
        act.setObjectName(f"action_{a.id}")
        if a.icon:
            act.setIcon(resources.icon(a.icon))
        if a.keys:
            act.setShortcuts([QKeySequence(k) for k in a.keys])
            act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        act.setToolTip(a.tip or a.title.replace("&", "").rstrip("…"))
        slot = getattr(target, a.slot)
        act.triggered.connect(lambda _checked=False, slot=slot, args=a.args: slot(*args))
        out[a.id] = act
    return out


def build_menus(bar: QMenuBar, actions: dict[str, QAction]) -> dict[str, QMenu]:
    menus = {name: bar.addMenu(f"&{name}") for name in MENUS}
    for a in ACTIONS:
        if a.menu and not a.id.startswith("relabel_"):
            menus[a.menu].addAction(actions[a.id])
    numbers = menus["Decide"].addMenu("Relabel to class")
    numbers.addActions([actions[a.id] for a in ACTIONS if a.id.startswith("relabel_")])
    return menus


def build_toolbar(bar: QToolBar, actions: dict[str, QAction]) -> None:
    """Toolbar actions in table order, a separator wherever the menu changes."""
    menu = None
    for a in ACTIONS:
        if not a.toolbar:
            continue
        if menu is not None and a.menu != menu:
            bar.addSeparator()
        menu = a.menu
        bar.addAction(actions[a.id])


def update_enabled(actions: dict[str, QAction], session: ReviewSession | None, busy: bool) -> None:
    for a in ACTIONS:
        actions[a.id].setEnabled(a.enabled(session, busy))


def keys_markdown() -> str:
    """The help panel's key table as Markdown, for the README (a test keeps them equal)."""
    lines = ["| key | does |", "|---|---|"]
    lines += [f"| {keys} | {does} |" for keys, does in help_rows()]
    return "\n".join(lines)
