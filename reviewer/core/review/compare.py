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
from reviewer.core.values import SUPPORTS, ZONES, FitSettings, display_name

CAUTION = (
    "Accuracy here is measured against the labels as edited, which flatters the edits; "
    "a trusted reference file is the honest comparison."
)


@dataclass
class Comparison:
    """Before (the baseline: labels as loaded) against after (the edited labels, fitted with
    the baseline's settings, so the difference is the edits alone).

    When the latest fit used other settings, ``metrics_new`` and ``new_settings`` describe
    it: the edits and the new settings together.
    """

    metrics: dict[str, tuple[Any, Any]]  # name -> (before, after)
    changed_rows: pd.DataFrame  # rows whose zone changed between before and after
    before_settings: FitSettings
    after_settings: FitSettings
    metrics_new: dict[str, Any] | None = None  # name -> value for the latest fit
    new_settings: FitSettings | None = None

    @property
    def settings_changed(self) -> bool:
        return self.new_settings is not None


def fit_metrics(fit: FitResult, baseline: FitResult | None = None) -> dict[str, Any]:
    """The numbers the comparison shows for one fit (model's labels counted against
    ``baseline``'s when given)."""
    s = fit.summary
    out: dict[str, Any] = {
        "rows fitted": s.n_fitted,
        "held-out accuracy": s.heldout_accuracy,
        "held-out balanced accuracy": s.heldout_balanced_accuracy,
        "training accuracy": s.training_accuracy,
        "sum of slacks": s.sum_slack,
    }
    for z in ZONES:
        out[f"rows {display_name(z)}"] = s.zone_counts.get(z)
    for k in SUPPORTS:
        out[f"rows {display_name(k)}"] = s.support_counts.get(k)
    if s.margin_width is not None:
        out["margin width 2/||w||"] = s.margin_width
    if baseline is not None:
        mine = fit.rows["model_label"].to_numpy()
        theirs = baseline.rows["model_label"].to_numpy()
        out["rows whose model's label changed"] = int(
            np.sum(np.fromiter((a != b for a, b in zip(theirs, mine, strict=True)), dtype=bool))
        )
    return out


def compare_fits(
    before: FitResult,
    after: FitResult,
    *,
    new: FitResult | None = None,
    labels: np.ndarray | None = None,
) -> Comparison:
    """``after`` should be the edited labels fitted with ``before``'s settings; ``new`` the
    latest fit when its settings differ. ``labels`` (the current ones) go into the changed
    rows table."""
    mb = fit_metrics(before)
    mb["rows whose model's label changed"] = 0
    ma = fit_metrics(after, before)
    metrics = {k: (mb.get(k), ma.get(k)) for k in dict.fromkeys([*mb, *ma])}
    sug_b = before.rows["model_label"].to_numpy()
    sug_a = after.rows["model_label"].to_numpy()
    zb = before.rows["zone"].to_numpy()
    za = after.rows["zone"].to_numpy()
    moved = np.flatnonzero((zb != za) & (zb != "") & (za != ""))
    table: dict[str, Any] = {"row": moved}
    if labels is not None:
        table["label"] = np.asarray(labels, dtype=object)[moved]
    table.update(
        {
            "zone_before": zb[moved],
            "zone_after": za[moved],
            "slack_before": before.rows["slack"].to_numpy()[moved],
            "slack_after": after.rows["slack"].to_numpy()[moved],
            "model_label_before": sug_b[moved],
            "model_label_after": sug_a[moved],
        }
    )
    return Comparison(
        metrics=metrics,
        changed_rows=pd.DataFrame(table),
        before_settings=before.settings,
        after_settings=after.settings,
        metrics_new=None if new is None else fit_metrics(new, before),
        new_settings=None if new is None else new.settings,
    )


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
