"""The value types and names the window and the command line share with core.

Settings, per-row result columns, zone and support codes, edit actions and review states.
Codes are what files carry; `display_name` gives the one on-screen name for each code.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from reviewer.core.errors import SettingsError

# ---- per-row results ---------------------------------------------------------------------------
ZONES = ("wrong_side", "inside_margin", "clear")
SUPPORTS = ("non_support", "margin_support", "bound_support")
ROW_COLUMNS = (
    "margin",
    "slack",
    "heldout_margin",
    "heldout_slack",
    "alpha",
    "zone",
    "support",
    "model_label",
    "score",
    "rank",
)
"""Columns of a fit's per-row table, one row per table row, in table order."""

# ---- settings ----------------------------------------------------------------------------------
KERNELS = ("linear", "rbf", "poly")
SCORES = ("heldout", "training")
SOLVERS = ("auto", "exact", "approximate")
DEFAULT_C = 1.0


@dataclass
class FitSettings:
    """What to fit. ``kernel="auto"`` chooses kernel, C and gamma by cross-validation.

    A fit's resolved settings are a FitSettings too: kernel and C filled in, and
    ``gamma_value`` the number that ``gamma="scale"`` came to.
    """

    kernel: str = "auto"
    C: float | None = None
    gamma: float | str = "scale"
    degree: int = 3
    class_weight: str | None = None
    folds: int = 5
    seed: int = 0
    score: str = "heldout"
    solver: str = "auto"
    gamma_value: float | None = None

    def validate(self) -> FitSettings:
        if self.kernel not in ("auto", *KERNELS):
            raise SettingsError(f"kernel {self.kernel!r} is not one of auto, {', '.join(KERNELS)}")
        if self.C is not None and not (np.isfinite(self.C) and self.C > 0):
            raise SettingsError(f"C must be a positive number, got {self.C!r}")
        if isinstance(self.gamma, str):
            if self.gamma != "scale":
                raise SettingsError(
                    f"gamma must be a positive number or 'scale', got {self.gamma!r}"
                )
        elif not (np.isfinite(self.gamma) and self.gamma > 0):
            raise SettingsError(f"gamma must be a positive number or 'scale', got {self.gamma!r}")
        if not (1 <= int(self.degree) <= 10):
            raise SettingsError(f"degree must be between 1 and 10, got {self.degree!r}")
        if self.class_weight not in (None, "balanced"):
            raise SettingsError(
                f"class weights must be none or 'balanced', got {self.class_weight!r}"
            )
        if self.folds != 0 and not (2 <= int(self.folds) <= 50):
            raise SettingsError(f"folds must be 0 (off) or between 2 and 50, got {self.folds!r}")
        if self.score not in SCORES:
            raise SettingsError(f"score must be one of {', '.join(SCORES)}, got {self.score!r}")
        if self.solver not in SOLVERS:
            raise SettingsError(f"solver must be one of {', '.join(SOLVERS)}, got {self.solver!r}")
        if not isinstance(self.seed, (int, np.integer)) or not (0 <= int(self.seed) < 2**32):
            raise SettingsError(
                f"seed must be a whole number from 0 to 2**32 - 1, got {self.seed!r}"
            )
        return self

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> FitSettings:
        known = {k: data[k] for k in cls.__dataclass_fields__ if k in data}
        return cls(**known)

    def as_fixed(self) -> FitSettings:
        """Resolved settings as settings to fit again exactly: the kernel, C and gamma that
        were used (no ``auto``, no ``scale``)."""
        gamma = self.gamma_value if self.gamma_value is not None else self.gamma
        return FitSettings.from_dict({**self.to_dict(), "gamma": gamma, "gamma_value": None})

    def same_fit_as(self, other: FitSettings) -> bool:
        """True when both resolve to the same model: kernel, C, gamma, degree, class weights,
        folds, seed, score and solver. Settings with ``auto`` are never the same as others."""
        if "auto" in (self.kernel, other.kernel):
            return False
        a, b = self.as_fixed(), other.as_fixed()
        if a.kernel == "linear":  # gamma and degree play no part in a linear fit
            a.gamma = b.gamma = "scale"
        if a.kernel != "poly":
            a.degree = b.degree = 3
        return a.to_dict() == b.to_dict()


# ---- edits and review states ------------------------------------------------------------------
CONFIRM = "confirm"
RELABEL = "relabel"
EXCLUDE = "exclude"
RESTORE = "restore"
NOTE = "note"
UNDO = "undo"
REDO = "redo"
EDIT_ACTIONS = (CONFIRM, RELABEL, EXCLUDE, RESTORE)
"""Actions that change the state; each one is one undo step, however many rows it names."""
ACTIONS = (*EDIT_ACTIONS, NOTE, UNDO, REDO)

OPEN = 0
CONFIRMED = 1
RELABELLED = 2
EXCLUDED = 3
REVIEW_NAMES = ("open", "confirmed", "relabelled", "excluded")
"""Review state names, indexed by the int8 codes in `LabelState.review`."""

LEGACY_NAMES = {"keep": CONFIRM, "unreviewed": "open", "kept": "confirmed"}
"""Names that session files of version 0.1 wrote, and what they are read as now."""

REASONS = (
    "label looks wrong",
    "agrees with its nearest neighbours",
    "checked against the original record",
    "ambiguous: could be either class",
    "duplicate of another row",
    "bad or missing measurements",
    "does not belong in this data set",
    "model is wrong here",
)
"""Ready-made reasons the window offers; any free text is accepted as well."""

# OWASP's CSV-injection guidance: a cell beginning with one of these is run as a formula by
# common spreadsheets. A plain decimal number (optional sign) is read as a number instead.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")


def looks_like_formula(text: str) -> bool:
    """True when a spreadsheet would run ``text`` as a formula (see FORMULA_START)."""
    return text.startswith(FORMULA_START) and _NUMBER.fullmatch(text) is None


def formula_warning(values: Iterable[object], what: str) -> str | None:
    """One warning naming up to three ``values`` that a spreadsheet would run as formulas."""
    try:
        distinct: Iterable[object] = set(values)  # a million labels, a handful of values
    except TypeError:  # unhashable values: look at each
        distinct = values
    found = sorted({str(v) for v in distinct if v is not None and looks_like_formula(str(v))})
    if not found:
        return None
    shown = ", ".join(repr(v) for v in found[:3]) + (" ..." if len(found) > 3 else "")
    n = len(found)
    return (
        f"some {what} begin like a spreadsheet formula ({n:,} distinct "
        f"value{'s' if n != 1 else ''}: {shown}); they are kept "
        "exactly in the cleaned file and the scan output, so take care opening those in a "
        "spreadsheet (the audit CSV neutralises them)"
    )


_DISPLAY = {
    "wrong_side": "wrong side",
    "inside_margin": "inside margin",
    "clear": "clear",
    "non_support": "not a support vector",
    "margin_support": "on the margin",
    "bound_support": "at the bound C",
    "heldout": "held-out margin",
    "training": "training margin",
}


def display_name(code: str) -> str:
    """The one name a code has on screen and in the report (files keep the code)."""
    return _DISPLAY.get(code, code)


# ---- a fit's summary --------------------------------------------------------------------------
@dataclass
class FitSummary:
    """What one fit came to, over the rows it was fitted on (labelled, not excluded)."""

    n_rows: int = 0
    n_fitted: int = 0
    n_unlabelled: int = 0
    n_left_out: int = 0
    classes: list[str] = field(default_factory=list)
    class_counts: dict[str, int] = field(default_factory=dict)
    zone_counts: dict[str, int] = field(default_factory=dict)
    support_counts: dict[str, int] = field(default_factory=dict)
    sum_slack: float = 0.0
    problems: list[dict[str, Any]] = field(default_factory=list)
    """One entry per binary problem: class, n_support, primal, dual, gap, converged..."""
    primal: float = 0.0
    dual: float = 0.0
    notes: list[str] = field(default_factory=list)
    training_accuracy: float | None = None
    heldout_accuracy: float | None = None
    heldout_balanced_accuracy: float | None = None
    sum_heldout_slack: float | None = None
    margin_width: float | None = None
    candidates: list[dict[str, Any]] = field(default_factory=list)
    """The settings `auto` tried, with their cross-validated scores."""
    seconds: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> FitSummary:
        known = {k: data[k] for k in cls.__dataclass_fields__ if k in data}
        return cls(**known)
