"""The ``auto`` setting and the C curve: choose kernel, C and gamma by cross-validation.

The grid is small on purpose so ``auto`` stays quick and its work is bounded
(15 candidates x 3 folds on at most ``TUNE_ROWS`` rows, whatever the table's size):

* linear: C in {0.01, 0.1, 1}
* rbf:    C in {0.1, 1, 10, 100} x gamma in {1/4, 1, 4} times the 'scale' gamma

The search is scikit-learn's GridSearchCV over stratified folds, scored by balanced
accuracy, with ``one_standard_error_index`` as its refit rule: per kernel the simplest
candidate within one standard error of that kernel's best, and a flexible kernel only when
it is clearly better than linear. On planted-flip benchmarks this beat "highest score
wins", which picks a large C or a flexible kernel that bends around wrong labels
(tests/benchmarks/results/detection.md, real_tables.md).

On sparse features (TF-IDF text) ``auto`` tries the linear kernel only: it is the usual
choice for text (Joachims 1998), and an rbf fit on text has no fast large-table path here.
Its C grid there is TEXT_LINEAR_CS = {0.1, 1, 10}: TF-IDF rows have unit length, where
standardised numeric rows have ||x||^2 near d, so the same C regularises text far more. On
900 tweets of dslabs' trump_tweets (three posting apps) the numeric grid's one-standard-error
pick was C = 0.01, where no row was clear of the margin (median slack 0.98).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.metrics import accuracy_score, balanced_accuracy_score
from sklearn.model_selection import GridSearchCV, StratifiedKFold, train_test_split

from reviewer.core.model.engine import SoftMarginClassifier, margins_from_decision, resolve_gamma
from reviewer.core.progress import Reporter

LINEAR_CS = (0.01, 0.1, 1.0)
TEXT_LINEAR_CS = (0.1, 1.0, 10.0)
RBF_CS = (0.1, 1.0, 10.0, 100.0)
RBF_GAMMA_FACTORS = (0.25, 1.0, 4.0)
TUNE_ROWS = 1000
TUNE_FOLDS = 3
CURVE_CS = tuple(float(c) for c in np.logspace(-3, 3, 13))
SPARSE_AUTO_NOTE = (
    "auto tried the linear kernel only, C in {0.1, 1, 10}: the features include text "
    "(sparse TF-IDF), where the linear kernel is the usual choice"
)


def auto_kernels(
    X: np.ndarray | sp.spmatrix, kernels: tuple[str, ...] = ("linear", "rbf")
) -> tuple[tuple[str, ...], str | None]:
    """The kernels ``auto`` tries on X, and a note for the fit summary when it narrowed them
    (sparse text features: linear only)."""
    if sp.issparse(X) and any(k != "linear" for k in kernels):
        return ("linear",), SPARSE_AUTO_NOTE
    return kernels, None


@dataclass
class Candidate:
    kernel: str
    C: float
    gamma: float | None
    gamma_factor: float | None
    accuracy: float
    balanced_accuracy: float
    n_bound: float
    n_wrong_side: float
    balanced_accuracy_se: float = float("nan")

    def as_dict(self) -> dict:
        return dict(self.__dict__)


def tuning_sample(y_idx: np.ndarray, limit: int, seed: int) -> np.ndarray:
    """Row positions of a stratified sample of at most ``limit`` rows."""
    n = len(y_idx)
    if n <= limit:
        return np.arange(n)
    counts = np.bincount(y_idx)
    if counts[counts > 0].min() < 2:
        rng = np.random.default_rng(seed)
        return np.sort(rng.choice(n, size=limit, replace=False))
    keep, _ = train_test_split(np.arange(n), train_size=limit, stratify=y_idx, random_state=seed)
    return np.sort(keep)


def cross_validate(
    X: np.ndarray | sp.spmatrix,
    y_idx: np.ndarray,
    *,
    kernel: str,
    C: float,
    gamma: float,
    degree: int = 3,
    class_weight: str | None = None,
    folds: int = TUNE_FOLDS,
    seed: int = 0,
    report: Reporter | None = None,
    solver: str = "auto",
) -> Candidate:
    """Mean accuracy, balanced accuracy, bound support count and wrong_side count over folds."""
    report = report or Reporter()
    splitter = StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed)
    acc, bal, bound, wrong = [], [], [], []
    for i, (train, test) in enumerate(splitter.split(np.zeros(len(y_idx)), y_idx)):
        report.check()
        model = SoftMarginClassifier(
            kernel=kernel,
            C=C,
            gamma=gamma,
            degree=degree,
            class_weight=class_weight,
            solver=solver,
        )
        model.fit(X[train], y_idx[train].astype(str))
        cols = model.classes_.astype(int)
        pred = cols[np.argmax(model.decision_matrix(X[test]), axis=1)]
        acc.append(accuracy_score(y_idx[test], pred))
        bal.append(balanced_accuracy_score(y_idx[test], pred))
        alpha, upper = model.row_alpha()
        bound.append(int(np.sum(alpha >= upper * (1 - 1e-6))))
        m = margins_from_decision(model.training_decision(), model.y_idx_)
        wrong.append(int(np.sum(m < 0)))
        report((i + 1) / folds)
    return Candidate(
        kernel=kernel,
        C=float(C),
        gamma=float(gamma) if kernel != "linear" else None,
        gamma_factor=None,
        accuracy=float(np.mean(acc)),
        balanced_accuracy=float(np.mean(bal)),
        n_bound=float(np.mean(bound)),
        n_wrong_side=float(np.mean(wrong)),
        balanced_accuracy_se=float(np.std(bal, ddof=1) / np.sqrt(len(bal)))
        if len(bal) > 1
        else 0.0,
    )


# A flexible kernel must beat the best linear candidate's cross-validated balanced accuracy by
# at least this much (and by one standard error) to be chosen: on the real-table benchmark an
# rbf fit chosen on a tie ranked planted flips worse than linear on every binary table.
FLEXIBLE_MARGIN = 0.01


def one_standard_error_index(cv_results: dict) -> int:
    """GridSearchCV ``refit`` callable: the simplest candidate within one standard error.

    One-standard-error rule (Breiman et al. 1984; Hastie, Tibshirani & Friedman, ESL 7.10),
    applied per kernel: the smallest C (then the smallest gamma) whose mean balanced
    accuracy is within one standard error of that kernel's best. An rbf pick replaces the
    linear pick only if its best score is above the linear best by more than
    max(one standard error, FLEXIBLE_MARGIN). Scored on noisy labels, a large C and a
    flexible kernel win by a hair while bending around the very rows we want to find.
    """
    params = cv_results["params"]
    mean = np.asarray(cv_results["mean_test_balanced_accuracy"], dtype=float)
    std = np.asarray(cv_results["std_test_balanced_accuracy"], dtype=float)
    n_splits = sum(1 for k in cv_results if k.startswith("split") and "balanced" in k)
    se = std / np.sqrt(max(n_splits, 1))
    picks: dict[str, tuple[int, float, float]] = {}
    for kernel in dict.fromkeys(p["kernel"] for p in params):
        rows = [i for i, p in enumerate(params) if p["kernel"] == kernel]
        top = max(rows, key=lambda i: (mean[i], -params[i]["C"]))
        floor = mean[top] - se[top]
        ok = [i for i in rows if mean[i] >= floor]
        # Simpler = smaller C, then smaller gamma (a smoother boundary).
        pick = min(ok, key=lambda i: (params[i]["C"], params[i].get("_f", 1.0)))
        picks[kernel] = (pick, float(mean[top]), float(se[top]))
    if "linear" not in picks:
        return next(iter(picks.values()))[0]
    lin, lin_best, lin_se = picks["linear"]
    for kernel, (pick, best, _se) in picks.items():
        if kernel != "linear" and best > lin_best + max(lin_se, FLEXIBLE_MARGIN):
            return pick
    return lin


def choose_settings(
    X: np.ndarray | sp.spmatrix,
    y_idx: np.ndarray,
    *,
    class_weight: str | None = None,
    seed: int = 0,
    kernels: tuple[str, ...] = ("linear", "rbf"),
    rbf_cs: tuple[float, ...] = RBF_CS,
    report: Reporter | None = None,
) -> tuple[Candidate, list[Candidate]]:
    """The chosen candidate of the documented grid, and every candidate's scores.

    ``rbf_cs`` narrows the rbf part of the grid (fitting leaves out C values whose scan of
    the whole table is predicted to take longer than engine.SLOW_SCAN_SECONDS).

    Runs scikit-learn's GridSearchCV over stratified folds of a stratified sample of at most
    TUNE_ROWS rows, with ``one_standard_error_index`` as its refit rule (refit itself is
    skipped: the review fit that follows uses all rows). Sparse X (text) tries the linear
    kernel only (``auto_kernels``).
    """
    report = report or Reporter()
    kernels, _note = auto_kernels(X, kernels)
    rows = tuning_sample(y_idx, TUNE_ROWS, seed)
    Xs, ys = X[rows], y_idx[rows]
    counts = np.bincount(ys)
    folds = int(min(TUNE_FOLDS, counts[counts > 0].min()))
    if folds < 2:
        # Too few rows in some class to cross-validate: fall back to the plainest model.
        fallback = Candidate("linear", 1.0, None, None, float("nan"), float("nan"), 0, 0)
        return fallback, []
    base_gamma = resolve_gamma("scale", Xs)
    grid: list[dict] = []
    if "linear" in kernels:
        linear_cs = TEXT_LINEAR_CS if sp.issparse(X) else LINEAR_CS
        grid.append({"kernel": ["linear"], "C": list(linear_cs)})
    if "rbf" in kernels and rbf_cs:
        grid.append(
            {
                "kernel": ["rbf"],
                "C": list(rbf_cs),
                "gamma": [base_gamma * g for g in RBF_GAMMA_FACTORS],
            }
        )
    total = folds * sum(len(g["C"]) * len(g.get("gamma", [None])) for g in grid)
    done = [0]

    def balanced(estimator, X_test, y_test) -> float:
        # Scorer hook: progress after every fold fit, and the user's cancel between fits.
        report.check()
        done[0] += 1
        report(min(done[0] / total, 1.0), f"choosing settings ({done[0]} of {total} fits)")
        return balanced_accuracy_score(y_test, estimator.predict(X_test))

    def plain(estimator, X_test, y_test) -> float:
        return accuracy_score(y_test, estimator.predict(X_test))

    search = GridSearchCV(
        SoftMarginClassifier(class_weight=class_weight),
        grid,
        scoring={"balanced_accuracy": balanced, "accuracy": plain},
        cv=StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed),
        refit=False,
        error_score="raise",
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        search.fit(Xs, ys)
    res = search.cv_results_
    for p in res["params"]:
        if p["kernel"] != "linear":
            p["_f"] = p["gamma"] / base_gamma
    results = [
        Candidate(
            kernel=p["kernel"],
            C=float(p["C"]),
            gamma=float(p["gamma"]) if p["kernel"] != "linear" else None,
            gamma_factor=p.get("_f"),
            accuracy=float(res["mean_test_accuracy"][i]),
            balanced_accuracy=float(res["mean_test_balanced_accuracy"][i]),
            n_bound=float("nan"),
            n_wrong_side=float("nan"),
            balanced_accuracy_se=float(res["std_test_balanced_accuracy"][i] / np.sqrt(folds)),
        )
        for i, p in enumerate(res["params"])
    ]
    best = results[one_standard_error_index(res)]
    report(1.0, "settings chosen")
    return best, results


def c_curve(
    X: np.ndarray | sp.spmatrix,
    y_idx: np.ndarray,
    *,
    kernel: str,
    Cs: tuple[float, ...] = CURVE_CS,
    gammas: tuple[float, ...] | None = None,
    degree: int = 3,
    class_weight: str | None = None,
    folds: int = 5,
    seed: int = 0,
    report: Reporter | None = None,
) -> list[Candidate]:
    """Cross-validated scores across a log grid of C (and of gamma for rbf/poly).

    On sparse X the rbf and poly curves use the exact LIBSVM solver (the approximate rbf path
    needs dense rows); the curve's rows are a sample of at most CURVE_ROWS, within its cache.
    """
    report = report or Reporter()
    solver = "exact" if sp.issparse(X) and kernel != "linear" else "auto"
    gamma_list = gammas or (resolve_gamma("scale", X),)
    if kernel == "linear":
        gamma_list = (resolve_gamma("scale", X),)
    out: list[Candidate] = []
    total = len(Cs) * len(gamma_list)
    for gi, g in enumerate(gamma_list):
        for ci, c in enumerate(Cs):
            step = gi * len(Cs) + ci
            sub = report.slice(step / total, (step + 1) / total)
            sub(0.0, f"C curve: {kernel}, C={c:g}")
            out.append(
                cross_validate(
                    X,
                    y_idx,
                    kernel=kernel,
                    C=c,
                    gamma=g,
                    degree=degree,
                    class_weight=class_weight,
                    folds=folds,
                    seed=seed,
                    report=sub,
                    solver=solver,
                )
            )
    return out


# The curve cross-validates len(Cs) x len(gammas) x folds fits; beyond this many rows it runs
# on a stratified sample so a sweep stays in minutes at a million rows.
CURVE_ROWS = 5000
CURVE_GAMMA_FACTORS = (0.25, 1.0, 4.0)


def curve_labels(
    labels: np.ndarray, excluded: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(row positions, class index per row, class names) of the rows a fit would use:
    labelled and not excluded."""
    labels = np.asarray(labels, dtype=object)
    use = np.array([v is not None for v in labels], dtype=bool)
    if excluded is not None:
        use &= ~np.asarray(excluded, dtype=bool)
    rows = np.flatnonzero(use)
    classes, y_idx = np.unique(labels[rows].astype(str), return_inverse=True)
    return rows, y_idx, classes


def c_curve_for_labels(
    X: np.ndarray | sp.spmatrix,
    labels: np.ndarray,
    excluded: np.ndarray | None,
    *,
    kernel: str,
    Cs: tuple[float, ...] = CURVE_CS,
    gamma_factors: tuple[float, ...] = CURVE_GAMMA_FACTORS,
    degree: int = 3,
    class_weight: str | None = None,
    folds: int = 5,
    seed: int = 0,
    max_rows: int = CURVE_ROWS,
    progress=None,
    cancel=None,
) -> dict:
    """The C curve over the current labels and exclusions, for a background task.

    Gammas are ``gamma_factors`` times the 'scale' gamma of the rows used (one curve each;
    the linear kernel has one curve). Returns {"kernel", "candidates", "n_rows", "sampled",
    "folds"}.
    """
    from reviewer.core.errors import InputError

    rows, y_idx, classes = curve_labels(labels, excluded)
    if len(classes) < 2:
        raise InputError("the C curve needs at least two classes among the labelled rows")
    keep = tuning_sample(y_idx, max_rows, seed)
    Xs, ys = X[rows[keep]], y_idx[keep]
    counts = np.bincount(ys)
    folds = int(min(folds, counts[counts > 0].min()))
    if folds < 2:
        raise InputError("the C curve needs at least two rows of every class to cross-validate")
    base = resolve_gamma("scale", Xs)
    gammas = (base,) if kernel == "linear" else tuple(base * g for g in gamma_factors)
    candidates = c_curve(
        Xs,
        ys,
        kernel=kernel,
        Cs=Cs,
        gammas=gammas,
        degree=degree,
        class_weight=class_weight,
        folds=folds,
        seed=seed,
        report=Reporter(progress, cancel),
    )
    return {
        "kernel": kernel,
        "candidates": candidates,
        "n_rows": len(keep),
        "sampled": len(keep) < len(rows),
        "folds": folds,
    }
