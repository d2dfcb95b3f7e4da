"""One review fit: settings in, per-row margins, slacks, zones and the ranking out."""

from __future__ import annotations

import functools
import time
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.metrics import accuracy_score, balanced_accuracy_score

from reviewer.core.errors import InputError
from reviewer.core.model import engine
from reviewer.core.model.engine import (
    SoftMarginClassifier,
    margins_from_decision,
    problem_summaries,
    support_kinds,
    zones_from_slack,
)
from reviewer.core.model.heldout import FoldFeatures, heldout_decision
from reviewer.core.model.tuning import RBF_CS, auto_kernels, choose_settings
from reviewer.core.progress import ProgressFn, Reporter
from reviewer.core.values import DEFAULT_C, SUPPORTS, ZONES, FitSettings, FitSummary


@dataclass
class FitResult:
    """Per-row results aligned with the whole table, plus a summary of the fit."""

    rows: pd.DataFrame  # ROW_COLUMNS, one row per table row, in table order
    settings: FitSettings  # the settings actually used (auto resolved, gamma_value set)
    summary: FitSummary
    model: SoftMarginClassifier | None = field(default=None, repr=False)
    decision: np.ndarray | None = field(default=None, repr=False)  # (n, K) on every row

    @property
    def classes(self) -> list[str]:
        return list(self.summary.classes)


def fit_margins(
    X: np.ndarray,
    labels: np.ndarray,
    settings: FitSettings,
    *,
    excluded: np.ndarray | None = None,
    progress: ProgressFn | None = None,
    cancel=None,
    fold_features: FoldFeatures | None = None,
    jobs: int | None = None,
    cluster: str | None = None,
) -> FitResult:
    """Fit on rows with a label that are not excluded; report on every row of the table.

    ``fold_features(train, test)``, with positions into the table's rows, rebuilds the
    feature matrices of one held-out fold from its training rows (see heldout_decision).
    ``jobs`` (default: every usable core) and ``cluster`` (a Dask scheduler address) say
    where the held-out folds and auto's candidates run; they never change the results.

    Rows left out of the fit (unlabelled or excluded) still get decision values, so an
    excluded row's margin is what a model that never saw it thinks of its label.

    The ranking ``score`` (higher = more suspect) with the default ``score="heldout"`` is
    minus the row's held-out margin: f_y(x) - max_{k != y} f_k(x) (y f(x) for two classes)
    from the soft-margin model of the cross-fitting fold that did not see the row, so 1 + score
    is the held-out slack where positive. Where a held-out margin is empty (a class with a
    single row) the training margin stands in; with ``score="training"`` or ``folds=0`` the
    score is minus the training margin. A calibrated probability of the given label was
    measured as an alternative and not adopted (tests/benchmarks/results/real_tables.md).
    """
    started = time.perf_counter()
    settings = FitSettings(**settings.to_dict()).validate()
    report = Reporter(progress, cancel)
    n = len(labels)
    if X.shape[0] != n:
        raise InputError(f"feature matrix has {X.shape[0]} rows but there are {n} labels")
    labels = np.asarray(labels, dtype=object)
    has_label = np.asarray(labels != None, dtype=bool)  # noqa: E711 (elementwise)
    fit_mask = has_label.copy()
    if excluded is not None:
        fit_mask &= ~np.asarray(excluded, dtype=bool)
    fit_rows = np.flatnonzero(fit_mask)
    if len(fit_rows) == 0:
        raise InputError("no labelled rows left to fit")
    classes, fit_idx = np.unique(labels[fit_rows].astype(str), return_inverse=True)
    if len(classes) < 2:
        raise InputError(
            f"need at least two classes to fit; the labelled rows all have {str(classes[0])!r}"
            if len(classes) == 1
            else "need at least two classes to fit"
        )
    counts = np.bincount(fit_idx)
    if int(counts.max()) < 2:
        raise InputError(
            f"every class has a single labelled row ({len(classes):,} classes in "
            f"{len(fit_rows):,} rows): a review needs classes with two or more rows, since "
            "a row's held-out margin comes from a model that saw other rows of its class. "
            "Is this an id column rather than a label?"
        )
    notes: list[str] = []
    singles = int(np.sum(counts < 2))
    if singles > len(classes) // 2:
        notes.append(
            f"{singles:,} of {len(classes):,} classes have a single labelled row; their rows "
            "get no held-out margin, so the ranking cannot judge them"
        )
    resolved = settings.to_dict()
    candidates: list[dict] = []
    Xf = X if len(fit_rows) == n else X[fit_rows]  # every row fitted: no copy
    # Features as the solvers' cost counts them: d, or stored values per row when sparse.
    cost_d = engine.cost_features(X)
    sparse = engine.is_sparse(X)
    if settings.kernel == "auto":
        kernels, narrowed = auto_kernels(X)
        if narrowed:
            notes.append(narrowed)
        # Bound auto's work: no rbf C whose scan of this table is predicted over the budget.
        rbf_cs = tuple(
            c
            for c in RBF_CS
            if engine.predicted_scan_seconds(
                len(fit_rows), cost_d, len(classes), "rbf", c, int(settings.folds), sparse=sparse
            )
            <= engine.SLOW_SCAN_SECONDS
            # Sparse rows have no approximate rbf path: only C values solved exactly.
            and not (
                sparse
                and engine.choose_solver(len(fit_rows), cost_d, "rbf", c, sparse=True) != "exact"
            )
        )
        if "rbf" in kernels and len(rbf_cs) < len(RBF_CS):
            left_out = ", ".join(f"{c:g}" for c in RBF_CS if c not in rbf_cs)
            notes.append(
                f"auto left out rbf with C={left_out}: predicted over "
                f"{engine.SLOW_SCAN_SECONDS:.0f} s on {len(fit_rows):,} rows"
            )
        best, tried = choose_settings(
            Xf,
            fit_idx,
            kernels=kernels,
            class_weight=settings.class_weight,
            seed=settings.seed,
            rbf_cs=rbf_cs,
            report=report.slice(0.0, 0.3),
            jobs=jobs,
            cluster=cluster,
        )
        resolved.update(kernel=best.kernel, C=best.C, gamma=best.gamma if best.gamma else "scale")
        candidates = [c.as_dict() for c in tried]
        notes.append(
            f"auto chose {best.kernel}, C={best.C:g}"
            + (f", gamma={best.gamma:.4g}" if best.kernel != "linear" and best.gamma else "")
            + (
                f" (cross-validated balanced accuracy {best.balanced_accuracy:.3f})"
                if tried
                else ""
            )
        )
        main_start = 0.3
    else:
        if resolved["C"] is None:
            resolved["C"] = DEFAULT_C
        main_start = 0.0

    def make_model() -> SoftMarginClassifier:
        return SoftMarginClassifier(
            kernel=resolved["kernel"],
            C=float(resolved["C"]),
            gamma=resolved["gamma"],
            degree=int(resolved["degree"]),
            class_weight=resolved["class_weight"],
            solver=resolved["solver"],
        )

    folds = int(resolved["folds"])
    expected = engine.predicted_scan_seconds(
        len(fit_rows),
        cost_d,
        len(classes),
        resolved["kernel"],
        float(resolved["C"]),
        folds,
        sparse=sparse,
    )
    if expected > engine.SLOW_SCAN_SECONDS:
        slow = (
            f"this fit is predicted to take about {_duration(expected)} "
            f"({resolved['kernel']} kernel, {len(fit_rows):,} rows, {len(classes)} classes); "
            "a linear kernel or fewer folds is much faster"
        )
        notes.append(slow)
        report(main_start, slow)
    fit_end = main_start + (1.0 - main_start) * (0.25 if folds else 0.9)
    model = make_model().fit(
        Xf, labels[fit_rows].astype(str), report=report.slice(main_start, fit_end)
    )
    # A linear fit uses no gamma: none is reported.
    resolved["gamma_value"] = None if resolved["kernel"] == "linear" else float(model.gamma_)
    stopped = [
        str(cls)
        for cls, p in zip(
            model.classes_[1:] if len(classes) == 2 else model.classes_,
            model.problems_,
            strict=True,
        )
        if not p.converged
    ]
    if stopped:
        notes.append(
            f"the solver stopped at its iteration limit "
            f"({engine.iteration_cap(len(fit_rows)):,} iterations) before "
            f"converging for {', '.join(stopped)}; margins and slacks are approximate"
        )
    report(fit_end, "scoring every row")

    # Class index of every labelled row; -1 where unlabelled or a class the fit never saw.
    lookup = {c: i for i, c in enumerate(classes)}
    codes, distinct = pd.factorize(labels, use_na_sentinel=False)
    y_all = np.array(
        [-1 if v is None else lookup.get(str(v), -1) for v in distinct], dtype=np.int64
    )[codes]
    F = np.empty((n, len(classes)))
    F[fit_rows] = model.training_decision()
    others = np.flatnonzero(~fit_mask)
    if len(others):
        F[others] = model.decision_matrix(X[others])
    margin = margins_from_decision(F, y_all)
    slack = np.maximum(0.0, 1.0 - margin)

    alpha = np.full(n, np.nan)
    upper = np.full(n, np.nan)
    a, u = model.row_alpha()
    alpha[fit_rows], upper[fit_rows] = a, u

    held_margin = np.full(n, np.nan)
    F_held = None
    if folds:
        fold_seconds = expected - engine.predicted_scan_seconds(
            len(fit_rows),
            cost_d,
            len(classes),
            resolved["kernel"],
            float(resolved["C"]),
            0,
            sparse=sparse,
        )
        held_fit, fold_notes = heldout_decision(
            Xf,
            fit_idx,
            len(classes),
            make_model(),
            folds,
            settings.seed,
            report=report.slice(fit_end, 0.98),
            fold_features=None
            if fold_features is None
            else functools.partial(_fold_rows, fold_features, fit_rows),
            jobs=jobs,
            cluster=cluster,
            # Rebuilt fold features have their own columns: no shared starting point.
            warm_start=warm_start(model) if WARM_FOLDS and fold_features is None else None,
            predicted_seconds=fold_seconds,
        )
        notes.extend(fold_notes)
        F_held = F.copy()  # rows outside the fit: the full model never saw them either
        F_held[fit_rows] = held_fit
        held_margin = margins_from_decision(F_held, y_all)
    held_slack = np.maximum(0.0, 1.0 - held_margin)

    use_heldout = settings.score == "heldout" and folds > 0
    # A row whose held-out margin is empty (its class has a single row) keeps its training
    # margin as score, so a labelled row is never left without a rank.
    basis = np.where(np.isnan(held_margin), margin, held_margin) if use_heldout else margin
    score = -basis
    F_suggest = F_held if use_heldout and F_held is not None else F
    suggest_cols = np.where(np.isnan(F_suggest), -np.inf, F_suggest)
    suggested = classes[np.argmax(suggest_cols, axis=1)].astype(object)
    suggested[np.all(np.isnan(F_suggest), axis=1)] = None
    rank = ranks_from_score(score, tie_break=-margin)

    rows = pd.DataFrame(
        {
            "margin": margin,
            "slack": slack,
            "heldout_margin": held_margin,
            "heldout_slack": held_slack,
            "alpha": alpha,
            "zone": zones_from_slack(slack),
            "support": support_kinds(alpha, upper),
            "model_label": suggested,
            "score": score,
            "rank": rank,
        }
    )
    summary = summarise(
        rows, labels, fit_mask, has_label, classes, model, notes, held_margin, F_held, y_all
    )
    summary.candidates = candidates
    summary.seconds = round(time.perf_counter() - started, 3)
    report(1.0, "fit finished")
    return FitResult(
        rows=rows,
        settings=FitSettings.from_dict(resolved),
        summary=summary,
        model=model,
        decision=F,
    )


# Start each fold's primal linear solve from the full fit's (w, b): the fold's problem differs
# by a fifth of the rows (tests/benchmarks/results/fold_speed.md).
WARM_FOLDS = True


def warm_start(model: SoftMarginClassifier) -> dict[int, tuple[np.ndarray, float]] | None:
    """Class position -> (w, b) of each primal linear problem of ``model``; None if none."""
    if model.kernel != "linear":
        return None
    targets = [1] if len(model.classes_) == 2 else range(len(model.classes_))
    out = {
        int(t): (np.asarray(p.w, dtype=float), float(p.intercept))
        for t, p in zip(targets, model.problems_, strict=True)
        if p.w is not None and p._estimator is None
    }
    return out or None


def _fold_rows(fold_features: FoldFeatures, fit_rows: np.ndarray, train, test):
    """A fold's matrices from positions into the fitted rows (picklable, unlike a lambda)."""
    return fold_features(fit_rows[train], fit_rows[test])


def _duration(seconds: float) -> str:
    return f"{seconds:.0f} s" if seconds < 120 else f"{seconds / 60:.0f} minutes"


def ranks_from_score(score: np.ndarray, tie_break: np.ndarray | None = None) -> np.ndarray:
    """Rank 1 = highest score; rows without a score get rank 0 (shown empty)."""
    n = len(score)
    rank = np.zeros(n, dtype=np.int64)
    ok = np.isfinite(score)
    idx = np.flatnonzero(ok)
    if len(idx) == 0:
        return rank
    keys = [idx]
    if tie_break is not None:
        keys.insert(0, -np.nan_to_num(tie_break[idx], nan=-np.inf))
    keys.insert(0, -score[idx])
    order = idx[np.lexsort(keys[::-1])]
    rank[order] = np.arange(1, len(order) + 1)
    return rank


def summarise(
    rows: pd.DataFrame,
    labels: np.ndarray,
    fit_mask: np.ndarray,
    has_label: np.ndarray,
    classes: np.ndarray,
    model: SoftMarginClassifier,
    notes: list[str],
    held_margin: np.ndarray,
    F_held: np.ndarray | None,
    y_all: np.ndarray,
) -> FitSummary:
    fitted = rows if fit_mask.all() else rows[fit_mask]
    zone_counts = {z: int((fitted["zone"] == z).sum()) for z in ZONES}
    support_counts = {s: int((fitted["support"] == s).sum()) for s in SUPPORTS}
    fitted_labels = labels[fit_mask].astype(str)
    class_counts = {str(c): int(np.sum(fitted_labels == c)) for c in classes}
    problems = problem_summaries(model)
    out = FitSummary(
        n_rows=len(rows),
        n_fitted=int(fit_mask.sum()),
        n_unlabelled=int((~has_label).sum()),
        n_left_out=int((has_label & ~fit_mask).sum()),
        classes=[str(c) for c in classes],
        class_counts=class_counts,
        zone_counts=zone_counts,
        support_counts=support_counts,
        sum_slack=float(fitted["slack"].sum()),
        problems=problems,
        primal=float(sum(p["primal"] for p in problems)),
        dual=float(sum(p["dual"] for p in problems)),
        notes=notes,
    )
    F_fit = model.training_decision()
    y_fit = y_all[fit_mask]
    pred = np.argmax(F_fit, axis=1)
    out.training_accuracy = float(accuracy_score(y_fit, pred))
    if F_held is not None:
        Fh = F_held[fit_mask]
        ok = ~np.all(np.isnan(Fh), axis=1)
        ph = np.argmax(np.where(np.isnan(Fh), -np.inf, Fh), axis=1)
        out.heldout_accuracy = float(accuracy_score(y_fit[ok], ph[ok]))
        out.heldout_balanced_accuracy = float(balanced_accuracy_score(y_fit[ok], ph[ok]))
        out.sum_heldout_slack = float(np.nansum(rows["heldout_slack"].to_numpy()[fit_mask]))
    if len(classes) == 2 and problems[0].get("margin_width") is not None:
        out.margin_width = problems[0]["margin_width"]
    return out
