"""Before against after: the baseline fit (source labels, every row) and the current fit.

Accuracy measured against labels the reviewer edited flatters the edits; the honest
comparison scores both models on a trusted reference (see ``score_on_reference``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from reviewer.core.model.fitting import FitResult
from reviewer.core.values import SUPPORTS, ZONES

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
        "rows fitted": (sb.n_fitted, sa.n_fitted),
        "held-out accuracy": (sb.heldout_accuracy, sa.heldout_accuracy),
        "held-out balanced accuracy": (sb.heldout_balanced_accuracy, sa.heldout_balanced_accuracy),
        "training accuracy": (sb.training_accuracy, sa.training_accuracy),
        "sum of slacks": (sb.sum_slack, sa.sum_slack),
    }
    for z in ZONES:
        metrics[f"rows {z}"] = (sb.zone_counts.get(z), sa.zone_counts.get(z))
    for s in SUPPORTS:
        metrics[f"rows {s}"] = (sb.support_counts.get(s), sa.support_counts.get(s))
    if sb.margin_width is not None or sa.margin_width is not None:
        metrics["margin width 2/||w||"] = (sb.margin_width, sa.margin_width)
    sug_b = before.rows["model_label"].to_numpy()
    sug_a = after.rows["model_label"].to_numpy()
    changed_suggestion = int(np.sum(np.array([a != b for a, b in zip(sug_b, sug_a, strict=True)])))
    metrics["rows whose model's label changed"] = (0, changed_suggestion)
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
            "model_label_before": sug_b[moved],
            "model_label_after": sug_a[moved],
        }
    )
    return Comparison(metrics=metrics, changed_rows=changed)


def score_on_reference(
    session_ids: Any,
    baseline_rows: pd.DataFrame,
    latest_rows: pd.DataFrame,
    reference: pd.DataFrame,
    id_col: str,
    label_col: str,
) -> dict[str, Any]:
    """Score both fits' model labels against trusted labels, rows matched by id.

    Only rows present in the reference, with a trusted label and a model's label from both fits,
    are scored, so before and after are measured on the same rows. Returns
    {"matched", "unmatched_reference", "before": {accuracy, balanced_accuracy},
    "after": {...}}.
    """
    import warnings

    from sklearn.metrics import accuracy_score, balanced_accuracy_score

    from reviewer.core.errors import InputError

    for col in (id_col, label_col):
        if col not in reference.columns:
            raise InputError(
                f"reference file has no column {col!r}; columns: {', '.join(map(str, reference))}"
            )
    ref = reference[[id_col, label_col]].dropna()
    trusted = dict(zip(ref[id_col].astype(str), ref[label_col].astype(str), strict=True))
    ids = [str(v) for v in np.asarray(session_ids)]
    sug_b = baseline_rows["model_label"].to_numpy()
    sug_a = latest_rows["model_label"].to_numpy()
    # A fit gives no suggestion for a row it could not score (None, or NaN once stored).
    has_both = ~pd.isna(sug_b) & ~pd.isna(sug_a)
    rows = [i for i, rid in enumerate(ids) if rid in trusted and has_both[i]]
    truth = [trusted[ids[i]] for i in rows]
    out: dict[str, Any] = {
        "matched": len(rows),
        "unmatched_reference": len(set(trusted) - set(ids)),
    }
    for name, sug in (("before", sug_b), ("after", sug_a)):
        pred = [str(sug[i]) for i in rows]
        with warnings.catch_warnings():
            # A predicted class the reference never uses is simply wrong on those rows.
            warnings.simplefilter("ignore", UserWarning)
            out[name] = {
                "accuracy": float(accuracy_score(truth, pred)) if rows else float("nan"),
                "balanced_accuracy": (
                    float(balanced_accuracy_score(truth, pred)) if rows else float("nan")
                ),
            }
    return out
