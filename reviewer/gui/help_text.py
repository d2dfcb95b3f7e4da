"""Words shown by the window: the help panel and the caution that goes with the ranking."""

from __future__ import annotations

from collections.abc import Sequence
from html import escape

CAUTION = (
    "The ranking only suggests; a person decides. Cleaned data that feeds decisions "
    "about people needs the usual care and review."
)

RANKING_TEXT = {
    "heldout": (
        "held-out slack: the slack each row gets from models that did not see it "
        "(cross-fitting), so a flexible model cannot hide a wrong label by bending round it"
    ),
    "training": "training slack: the slack each row gets from the model fitted on every row",
}


def ranking_words(score: str) -> str:
    """What the ranking uses, in words, for a FitSettings.score code."""
    return RANKING_TEXT.get(score, score)


def help_html(rows: Sequence[tuple[str, str]], score: str = "heldout") -> str:
    """The help panel: how to review, the keys (from the action table), the caution."""
    table = "".join(
        f"<tr><td style='padding:2px 14px 2px 0'><b>{escape(k)}</b></td><td>{escape(v)}</td></tr>"
        for k, v in rows
    )
    return (
        "<h3>Reviewing</h3>"
        f"<p>Rows are ranked by {escape(ranking_words(score))}; rank 1 is the row the model "
        'disagrees with most. "Rank by" in the fit settings switches between held-out and '
        "training slack. "
        "Work down the list: check each row against its class's typical values and its "
        "nearest neighbours, then decide. A reason chosen under the list goes with the next "
        "decision. After each decision the cursor moves to the next open row. "
        "Every decision is saved at once; refit to see the ranking change.</p>"
        f"<table>{table}</table>"
        f"<p><b>Please note.</b> {escape(CAUTION)}</p>"
    )
