"""Colours for classes, zones and review states, safe for the common forms of colour blindness.

The eight base colours are the Okabe–Ito palette (M. Okabe and K. Ito, "Color Universal
Design (CUD): How to make figures and presentations that are friendly to colorblind
people", 2008), chosen because its hues stay apart under protan, deutan and tritan vision.
Table rows use light tints of them, so black text stays readable on top.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtGui import QBrush, QColor

# The Okabe–Ito colours under plain names of our own.
INK = "#000000"
ORANGE = "#E69F00"
SKY = "#56B4E9"
GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILION = "#D55E00"
PURPLE = "#CC79A7"
# Not part of Okabe–Ito: a neutral grey for "nothing to see" and a dark text colour.
GREY = "#8C8C8C"
TEXT = "#1F2328"

# Order for classes: the most distinct pairs first, yellow late (weak on white).
CLASS_COLORS: tuple[str, ...] = (BLUE, ORANGE, GREEN, PURPLE, SKY, VERMILION, INK, YELLOW)

ZONES: tuple[str, ...] = ("wrong_side", "inside_margin", "clear")
ZONE_COLORS: dict[str, str] = {"wrong_side": VERMILION, "inside_margin": ORANGE, "clear": GREY}

STATES: tuple[str, ...] = ("open", "confirmed", "relabelled", "excluded")
# Relabelled rows are reddish purple, not blue: the selection colour is a light blue, and a
# relabelled row must not look selected. The Review column carries a symbol as well.
STATE_COLORS: dict[str, str] = {
    "open": GREY,
    "confirmed": GREEN,
    "relabelled": PURPLE,
    "excluded": INK,
}
SELECTION = "#CFE3F3"
"""The list's selection colour (assets/style.qss), kept apart from every row tint."""


def qcolor(color: str | QColor, alpha: int = 255) -> QColor:
    """A QColor from a hex string (or a copy of a QColor) with the given alpha (0-255)."""
    c = QColor(color)
    if not c.isValid():
        raise ValueError(f"not a colour: {color!r}")
    c.setAlpha(alpha)
    return c


def tint(color: str | QColor, strength: float = 0.25) -> QColor:
    """``color`` mixed into white: strength 0 is white, 1 the colour itself (row backgrounds)."""
    c = QColor(color)
    s = min(max(strength, 0.0), 1.0)
    return QColor(
        round(255 + (c.red() - 255) * s),
        round(255 + (c.green() - 255) * s),
        round(255 + (c.blue() - 255) * s),
    )


def class_color(i: int) -> QColor:
    """Colour of the i-th class; cycles after eight."""
    return QColor(CLASS_COLORS[i % len(CLASS_COLORS)])


def zone_color(zone: str) -> QColor:
    try:
        return QColor(ZONE_COLORS[zone])
    except KeyError:
        raise KeyError(f"unknown zone {zone!r}; expected one of {', '.join(ZONES)}") from None


def state_color(state: str) -> QColor:
    try:
        return QColor(STATE_COLORS[state])
    except KeyError:
        raise KeyError(
            f"unknown review state {state!r}; expected one of {', '.join(STATES)}"
        ) from None


def brush(color: str | QColor, alpha: int = 255) -> QBrush:
    """A pyqtgraph brush (for ScatterPlotItem, BarGraphItem...)."""
    return pg.mkBrush(qcolor(color, alpha))


def pen(color: str | QColor, width: float = 1.0, alpha: int = 255) -> Any:
    """A cosmetic pyqtgraph pen."""
    return pg.mkPen(qcolor(color, alpha), width=width)


def class_brushes(n_classes: int, alpha: int = 200) -> list[QBrush]:
    """One brush per class, to index by class code (colour by a few groups, not per point)."""
    return [brush(class_color(i), alpha) for i in range(n_classes)]


def codes_for(values: Iterable[str] | np.ndarray, names: tuple[str, ...]) -> np.ndarray:
    """int8 codes: position of each value in ``names``; -1 for anything else (no style)."""
    arr = np.asarray(values, dtype=object)
    codes = np.full(arr.shape[0], -1, dtype=np.int8)
    for i, name in enumerate(names):
        codes[arr == name] = i
    return codes


def zone_row_styles(strength: float = 0.22) -> dict[int, tuple[QColor | None, QColor | None]]:
    """Row styles for ArrayTableModel.set_row_style with codes from ``codes_for(z, ZONES)``.

    Clear rows keep the view's default background: colour marks what needs attention.
    """
    styles: dict[int, tuple[QColor | None, QColor | None]] = {}
    for i, zone in enumerate(ZONES):
        bg = None if zone == "clear" else tint(ZONE_COLORS[zone], strength)
        styles[i] = (bg, QColor(TEXT))
    return styles


def state_row_styles(strength: float = 0.28) -> dict[int, tuple[QColor | None, QColor | None]]:
    """Row styles for review states (codes from ``codes_for(s, STATES)``).

    Excluded rows get grey text instead of a dark background, so they read as set aside.
    """
    styles: dict[int, tuple[QColor | None, QColor | None]] = {}
    for i, state in enumerate(STATES):
        if state == "open":
            styles[i] = (None, None)
        elif state == "excluded":
            styles[i] = (tint(GREY, 0.15), QColor(GREY))
        else:
            styles[i] = (tint(STATE_COLORS[state], strength), QColor(TEXT))
    return styles
