"""Words shown by the window: the key list and the caution that goes with the ranking."""

from __future__ import annotations

CAUTION = (
    "The ranking only suggests; a person decides. Cleaned data that feeds decisions "
    "about people needs the usual care and review."
)

#: (keys, what they do), in the order the help panel lists them.
KEYS: tuple[tuple[str, str], ...] = (
    ("Up / Down, Page Up / Page Down", "move through the list"),
    ("Shift+click, Ctrl+click, Shift+Up/Down", "select several rows (a decision applies to all)"),
    ("C", "confirm: the label is right"),
    ("M", "take the model's label"),
    ("1 ... 9", "relabel to class N (numbers shown above the list)"),
    ("R", "relabel: pick a class or type a new name"),
    ("X", "exclude the row from the fit and the cleaned file"),
    ("Shift+X", "restore an excluded row"),
    ("N", "add a note (changes nothing)"),
    ("Ctrl+Z", "undo the last decision"),
    ("Ctrl+Shift+Z or Ctrl+Y", "redo"),
    ("F5 or Ctrl+R", "refit with the settings on the left"),
    ("Esc", "cancel a running fit (the previous fit stays)"),
    ("Ctrl+F", "jump to the id filter"),
    ("Ctrl+O", "open a data file"),
    ("Ctrl+E", "export the cleaned file"),
    ("F1", "this help"),
)


def help_html() -> str:
    rows = "".join(
        f"<tr><td style='padding:2px 14px 2px 0'><b>{k}</b></td><td>{v}</td></tr>" for k, v in KEYS
    )
    return (
        "<h3>Reviewing</h3>"
        "<p>Rows are ranked by how far they sit on the wrong side of the margin (slack). "
        "Work down the list: check each row against its class's typical values and its "
        "nearest neighbours, then decide. A reason chosen above the list goes with the next "
        "decision. After each decision the cursor moves to the next row nobody has reviewed. "
        "Every decision is saved at once; refit to see the ranking change.</p>"
        f"<table>{rows}</table>"
        f"<p><b>Please note.</b> {CAUTION}</p>"
    )
