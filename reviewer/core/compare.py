"""Before against after: the baseline fit (source labels, every row) and the current fit.

Accuracy measured against labels the reviewer edited flatters the edits; the honest
comparison scores both models on a trusted reference (see ``score_on_reference``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from reviewer.core.engine import SUPPORTS, ZONES
from reviewer.core.fitting import FitResult

CAUTION = (
    "Accuracy here is measured against the labels as edited, which flatters the edits; "
    "a trusted reference file is the honest comparison."
)


@dataclass
class Comparison:
    metrics: dict[str, tuple[Any, Any]]  # name -> (before, after)
    changed_rows: pd.DataFrame  # rows whose zone changed


def compare_fits(before: FitResult, after: FitResult) -> Comparison:
    sb, sa = before.summary, after.summary
    metrics: dict[str, tuple[Any, Any]] = {
        "rows fitted": (sb.get("n_fitted"), sa.get("n_fitted")),
        "held-out accuracy": (sb.get("heldout_accuracy"), sa.get("heldout_accuracy")),
        "held-out balanced accuracy": (
            sb.get("heldout_balanced_accuracy"),
            sa.get("heldout_balanced_accuracy"),
        ),
        "training accuracy": (sb.get("training_accuracy"), sa.get("training_accuracy")),
        "sum of slacks": (sb.get("sum_slack"), sa.get("sum_slack")),
    }
    for z in ZONES:
        metrics[f"rows {z}"] = (sb["zone_counts"].get(z), sa["zone_counts"].get(z))
    for s in SUPPORTS:
        metrics[f"rows {s}"] = (sb["support_counts"].get(s), sa["support_counts"].get(s))
    if "margin_width" in sb or "margin_width" in sa:
        metrics["margin width 2/||w||"] = (sb.get("margin_width"), sa.get("margin_width"))
    sug_b = before.rows["suggested_label"].to_numpy()
    sug_a = after.rows["suggested_label"].to_numpy()
    changed_suggestion = int(np.sum(np.array([a != b for a, b in zip(sug_b, sug_a, strict=True)])))
    metrics["rows whose suggested label changed"] = (0, changed_suggestion)
    zb = before.rows["zone"].to_numpy()
    za = after.rows["zone"].to_numpy()
    moved = np.flatnonzero((zb != za) & (zb != "") & (za != ""))
    changed = pd.DataFrame(
        {
            "row": moved,
            "zone_before": zb[moved],
            "zone_after": za[moved],
            "slack_before": before.rows["slack"].to_numpy()[moved],
            "slack_after": after.rows["slack"].to_numpy()[moved],
            "suggested_before": sug_b[moved],
            "suggested_after": sug_a[moved],
        }
    )
    return Comparison(metrics=metrics, changed_rows=changed)
