"""The probe: plant known label flips in a copy of the table and see where the ranking puts them.

It measures recovery of the planted flips only. Errors already in the data are not known, stay
in the ranking, and may rank above planted flips.
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from sklearn.metrics import average_precision_score, roc_auc_score

from reviewer.core.data.dataset import Vectors, prepare_dataset
from reviewer.core.data.loading import LoadedTable, label_strings
from reviewer.core.errors import InputError, SettingsError
from reviewer.core.model.fitting import fit_margins
from reviewer.core.model.heldout import FoldFeatures
from reviewer.core.plain import plain
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.values import FitSettings

REVIEW_SHARES = (0.05, 0.10, 0.20)
MAX_RATE = 0.5
CAUTION = (
    "This measures how well the ranking recovers flips the probe planted, not the errors "
    "already in the data. Rows that were already wrong stay in the ranking and may rank "
    "above the planted flips."
)


@dataclass
class ProbeResult:
    """Where the planted flips landed in the ranking."""

    rate: float
    seed: int
    n_rows: int
    n_labelled: int
    flipped_rows: np.ndarray  # positions in the table
    original_labels: np.ndarray
    planted_labels: np.ndarray
    ranks: np.ndarray  # rank of each flipped row (1 = most suspect)
    top: list[dict[str, Any]]  # one entry per review depth: name, reviewed, found, recall
    auroc: float
    average_precision: float
    settings: dict[str, Any]
    notes: list[str] = field(default_factory=list)
    flipped_ids: np.ndarray | None = None

    @property
    def n_flipped(self) -> int:
        return len(self.flipped_rows)

    def to_dict(self) -> dict[str, Any]:
        ids = self.flipped_ids if self.flipped_ids is not None else self.flipped_rows
        return {
            "caution": CAUTION,
            "rate": self.rate,
            "seed": self.seed,
            "n_rows": self.n_rows,
            "n_labelled": self.n_labelled,
            "n_flipped": self.n_flipped,
            "top": self.top,
            "auroc": self.auroc,
            "average_precision": self.average_precision,
            "settings": {k: plain(v) for k, v in self.settings.items()},
            "notes": list(self.notes),
            "flips": [
                {
                    "row": int(r),
                    "row_id": str(i),
                    "label": str(a),
                    "planted": str(b),
                    "rank": int(k),
                }
                for r, i, a, b, k in zip(
                    self.flipped_rows,
                    ids,
                    self.original_labels,
                    self.planted_labels,
                    self.ranks,
                    strict=True,
                )
            ],
        }


def plant_flips(labels: np.ndarray, rate: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """(labels with flips, flipped positions). Each flip goes to a different class at random."""
    if not (np.isfinite(rate) and 0.0 < rate < MAX_RATE):
        raise SettingsError(
            f"probe rate must be above 0 and below {MAX_RATE:g} (a share of the labelled rows), "
            f"got {rate!r}"
        )
    labels = np.asarray(labels, dtype=object)
    labelled = np.flatnonzero([v is not None for v in labels])
    classes = np.unique(labels[labelled].astype(str))
    if len(classes) < 2:
        raise InputError(
            "the probe needs at least two classes to flip between; "
            f"the labelled rows have {len(classes)}"
        )
    n_flip = round(rate * len(labelled))
    if n_flip < 1:
        raise SettingsError(
            f"probe rate {rate:g} of {len(labelled)} labelled rows plants no flip; raise the rate"
        )
    rng = np.random.default_rng(seed)
    rows = np.sort(rng.choice(labelled, size=n_flip, replace=False))
    planted = labels.copy()
    for r in rows:
        others = classes[classes != str(labels[r])]
        planted[r] = str(rng.choice(others))
    return planted, rows


def probe_labels(
    X: np.ndarray,
    labels: np.ndarray,
    settings: FitSettings,
    *,
    rate: float = 0.05,
    seed: int = 0,
    progress: ProgressFn | None = None,
    cancel=None,
    fold_features: FoldFeatures | None = None,
) -> ProbeResult:
    """Flip ``rate`` of the labelled rows, fit as scan would, and score where the flips rank."""
    labels = np.asarray(labels, dtype=object)
    planted, rows = plant_flips(labels, rate, seed)
    fit = fit_margins(
        X, planted, settings, progress=progress, cancel=cancel, fold_features=fold_features
    )
    rank = fit.rows["rank"].to_numpy()
    ranked = rank > 0  # rows with a score (labelled rows)
    n_ranked = int(ranked.sum())
    is_flip = np.zeros(len(labels), dtype=bool)
    is_flip[rows] = True
    flip_ranks = rank[rows]
    k = len(rows)
    top = [_depth(f"top k (= flips, {k})", k, flip_ranks)]
    for share in REVIEW_SHARES:
        reviewed = max(1, round(share * n_ranked))
        top.append(_depth(f"top {share:.0%}", reviewed, flip_ranks))
    score = fit.rows["score"].to_numpy(float)[ranked]
    truth = is_flip[ranked]
    if truth.all() or not truth.any():
        auroc = ap = float("nan")
    else:
        auroc = float(roc_auc_score(truth, score))
        ap = float(average_precision_score(truth, score))
    return ProbeResult(
        rate=float(rate),
        seed=int(seed),
        n_rows=len(labels),
        n_labelled=int(sum(v is not None for v in labels)),
        flipped_rows=rows,
        original_labels=labels[rows],
        planted_labels=planted[rows],
        ranks=flip_ranks,
        top=top,
        auroc=auroc,
        average_precision=ap,
        settings=fit.settings.to_dict(),
        notes=list(fit.summary.notes),
    )


def _depth(name: str, reviewed: int, flip_ranks: np.ndarray) -> dict[str, Any]:
    found = int(np.sum((flip_ranks >= 1) & (flip_ranks <= reviewed)))
    return {
        "review": name,
        "reviewed": int(reviewed),
        "found": found,
        "recall": found / len(flip_ranks),
    }


def probe_table(
    loaded: LoadedTable,
    label: str,
    *,
    id_column: str | None = None,
    settings: FitSettings | None = None,
    rate: float = 0.05,
    seed: int = 0,
    overrides: Mapping[str, str] | None = None,
    treat_as_classes: bool = False,
    vectors: Vectors | None = None,
    progress: ProgressFn | None = None,
    cancel=None,
) -> ProbeResult:
    """The probe on a loaded table: same roles and features as scan; the file is not changed."""
    report = Reporter(progress, cancel)
    settings = (settings or FitSettings()).validate()
    # Check the rate before the (slower) feature build so a bad rate fails at once.
    if label in loaded.frame.columns:
        plant_flips(label_strings(loaded.frame[label]), rate, seed)
    data = prepare_dataset(
        loaded,
        label=label,
        id_column=id_column,
        overrides=overrides,
        check_label=not treat_as_classes,
        vectors=vectors,
    )
    result = probe_labels(
        data.X,
        data.labels,
        settings,
        rate=rate,
        seed=seed,
        progress=report.slice(0.05, 1.0),
        cancel=cancel,
        fold_features=data.fold_features,
    )
    result.flipped_ids = data.ids[result.flipped_rows]
    result.notes.extend(data.notes)
    return result


def format_probe(result: ProbeResult) -> str:
    """The short text report printed by ``margin-reviewer probe``."""
    s = result.settings
    gamma = f", gamma={s['gamma_value']:.4g}" if s.get("kernel") != "linear" else ""
    lines = [
        f"probe: planted {result.n_flipped} label flips in {result.n_labelled} labelled rows "
        f"(rate {result.rate:g}, seed {result.seed})",
        f"settings: kernel={s['kernel']}, C={float(s['C']):g}{gamma}, folds={s['folds']}, "
        f"score={s['score']}",
        "",
        f"{'review':<22} {'rows':>6} {'flips found':>12} {'recall':>7}",
    ]
    for d in result.top:
        lines.append(
            f"{d['review']:<22} {d['reviewed']:>6} {d['found']:>6} of {result.n_flipped:<3} "
            f"{d['recall']:>7.2f}"
        )
    lines += [
        "",
        f"AUROC {result.auroc:.3f}   average precision {result.average_precision:.3f}",
        *[f"note: {n}" for n in result.notes],
        "",
        textwrap.fill(f"caution: {CAUTION}", width=88, subsequent_indent="  "),
    ]
    return "\n".join(lines)
