"""The ``auto`` setting and the C curve: choose kernel, C and gamma by cross-validation.

The grid is small on purpose so ``auto`` stays quick and its work is bounded
(15 candidates x 3 folds on at most ``TUNE_ROWS`` rows, whatever the table's size):

* linear: C in {0.01, 0.1, 1}
* rbf:    C in {0.1, 1, 10, 100} x gamma in {1/4, 1, 4} times the 'scale' gamma

The search scores every candidate as scikit-learn's GridSearchCV would over stratified folds
(balanced accuracy; tests/core/model/test_tuning.py checks it against GridSearchCV), but one
task per (gamma, fold) fits all of its Cs, sharing the fold's kernel matrix and warm starts,
on ``jobs`` threads or a Dask cluster. The choice uses ``one_standard_error_index``: per
kernel the simplest candidate within one standard error of that kernel's best, and a
flexible kernel only when it is clearly better than linear. On planted-flip benchmarks this
beat "highest score wins", which picks a large C or a flexible kernel that bends around wrong labels
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
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.metrics import accuracy_score, balanced_accuracy_score
from sklearn.model_selection import StratifiedKFold, train_test_split
from sklearn.svm import SVC
from sklearn.utils.class_weight import compute_sample_weight

from reviewer.core.model import engine
from reviewer.core.model.engine import SoftMarginClassifier, margins_from_decision, resolve_gamma
from reviewer.core.model.parallel import run_tasks
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
    "(sparse TF-IDF), and an exact rbf fit of this many rows is past its cost budget"
)


def auto_kernels(
    X: np.ndarray | sp.spmatrix, kernels: tuple[str, ...] = ("linear", "rbf")
) -> tuple[tuple[str, ...], str | None]:
    """The kernels ``auto`` tries on X, and a note for the fit summary when it narrowed them.

    Sparse (text) features have no approximate rbf path, so rbf stays in only while an exact
    solve of X's rows is within its cost budget (engine.choose_solver). On a table that mixes
    text with numbers it can matter: on the coffee demo (a tasting note beside five numeric
    columns) the linear kernel found 55-59 of the 90 planted errors in the top 10% and rbf
    71 (tests/benchmarks/results/text_auto.md)."""
    if sp.issparse(X) and any(k != "linear" for k in kernels):
        n = X.shape[0]
        exact = engine.choose_solver(n, engine.cost_features(X), "rbf", min(RBF_CS), sparse=True)
        if exact != "exact":
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
    return _candidate(kernel, C, gamma, list(zip(acc, bal, bound, wrong, strict=True)))


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
    jobs: int | None = None,
    cluster: str | None = None,
) -> tuple[Candidate, list[Candidate]]:
    """The chosen candidate of the documented grid, and every candidate's scores.

    ``rbf_cs`` narrows the rbf part of the grid (fitting leaves out C values whose scan of
    the whole table is predicted to take longer than engine.SLOW_SCAN_SECONDS).

    Scores as scikit-learn's GridSearchCV over stratified folds of a stratified sample of
    at most TUNE_ROWS rows, with ``one_standard_error_index`` as its refit rule (no refit:
    the review fit that follows uses all rows). ``jobs`` and ``cluster`` say where the
    fold sweeps run. Sparse X (text) tries the linear kernel only (``auto_kernels``).
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
    # (kernel, Cs, gammas) blocks in GridSearchCV's ParameterGrid order: C outer, gamma inner.
    blocks: list[tuple[str, tuple[float, ...], tuple[float, ...]]] = []
    if "linear" in kernels:
        linear_cs = TEXT_LINEAR_CS if sp.issparse(X) else LINEAR_CS
        blocks.append(("linear", tuple(linear_cs), (base_gamma,)))
    if "rbf" in kernels and rbf_cs:
        blocks.append(
            (
                "rbf",
                tuple(float(c) for c in rbf_cs),
                tuple(base_gamma * g for g in RBF_GAMMA_FACTORS),
            )
        )
    total = sum(len(g) for _, _, g in blocks) * folds
    params: list[dict] = []
    splits: list[list[FoldScores]] = []
    done = 0
    for kernel, cs, gammas in blocks:
        share = len(gammas) * folds / total
        scores = _grid_scores(
            Xs,
            ys,
            kernel=kernel,
            Cs=cs,
            gammas=gammas,
            degree=3,
            class_weight=class_weight,
            folds=folds,
            seed=seed,
            report=report.slice(done / total, done / total + share),
            jobs=jobs,
            cluster=cluster,
            message=lambda d, t: f"choosing settings ({d} of {t} fold sweeps)",
        )
        done += len(gammas) * folds
        for ci, c in enumerate(cs):
            for gi, g in enumerate(gammas):
                p = {"C": c, "kernel": kernel}
                if kernel != "linear":
                    p.update(gamma=g, _f=g / base_gamma)
                params.append(p)
                splits.append(scores[gi][ci])
    bal = np.array([[f[1] for f in fs] for fs in splits])
    acc = np.array([[f[0] for f in fs] for fs in splits])
    res: dict = {
        "params": params,
        # GridSearchCV's cv_results_ keys and statistics (population std over the splits).
        "mean_test_balanced_accuracy": bal.mean(axis=1),
        "std_test_balanced_accuracy": bal.std(axis=1),
        "mean_test_accuracy": acc.mean(axis=1),
        **{f"split{i}_test_balanced_accuracy": bal[:, i] for i in range(folds)},
    }
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
        for i, p in enumerate(params)
    ]
    best = results[one_standard_error_index(res)]
    report(1.0, "settings chosen")
    return best, results


FoldScores = tuple[float, float, int, int]
"""(accuracy, balanced accuracy, bound support count, wrong_side count) of one fold's fit."""


def _gram(A: Any, B: Any, kernel: str, gamma: float, degree: int) -> np.ndarray:
    """Kernel matrix k(A_i, B_j) as engine's LIBSVM kernels define it, dense float64."""
    G = A @ B.T
    G = np.asarray(G.toarray() if hasattr(G, "toarray") else G, dtype=np.float64)
    if kernel == "linear":
        return G
    if kernel == "poly":
        return (gamma * G + engine.POLY_COEF0) ** degree
    a_sq = np.asarray(A.multiply(A).sum(axis=1)).ravel() if hasattr(A, "multiply") else None
    if a_sq is None:
        a_sq = np.einsum("ij,ij->i", A, A)
    b_sq = np.asarray(B.multiply(B).sum(axis=1)).ravel() if hasattr(B, "multiply") else None
    if b_sq is None:
        b_sq = np.einsum("ij,ij->i", B, B)
    G *= -2.0
    G += a_sq[:, None]
    G += b_sq[None, :]
    np.maximum(G, 0.0, out=G)
    G *= -gamma
    return np.exp(G, out=G)


def _exact_on_gram(
    K: np.ndarray, K_test: np.ndarray, ypm: np.ndarray, C: float, weight: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """engine.fit_binary's exact LIBSVM solve on a precomputed kernel matrix:
    (training decision, test decision, alpha, upper)."""
    n = len(ypm)
    svc = SVC(
        kernel="precomputed",
        C=C,
        tol=1e-4,
        cache_size=engine.KERNEL_CACHE_MB,
        max_iter=engine.iteration_cap(n),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        svc.fit(K, ypm, sample_weight=weight)
    beta = np.zeros(n)  # alpha_i y_i, zero off the support
    beta[svc.support_] = svc.dual_coef_[0]
    b = float(svc.intercept_[0])
    upper = C * (np.ones(n) if weight is None else weight)
    return K @ beta + b, K_test @ beta + b, np.abs(beta), upper


def curve_fold(
    X: Any,
    y_idx: np.ndarray,
    kernel: str,
    gamma: float,
    degree: int,
    class_weight: str | None,
    Cs: tuple[float, ...],
    cancel: Any,
    train: np.ndarray,
    test: np.ndarray,
) -> list[FoldScores]:
    """One fold's scores for every C, as ``cross_validate`` computes them for one C.

    The fits of one fold share their work: where an rbf or poly problem is solved exactly
    (LIBSVM), one kernel matrix of the fold serves every C and every class; the primal linear
    solver starts each C from the previous C's (w, b).
    """
    X_train, X_test = X[train], X[test]
    y_train, y_test = y_idx[train], y_idx[test]
    # As SoftMarginClassifier.fit(X, y.astype(str)): classes sorted as strings.
    classes, yi = np.unique(y_train.astype(str), return_inverse=True)
    cols = classes.astype(int)
    k = len(classes)
    targets = [1] if k == 2 else list(range(k))
    weight = compute_sample_weight(class_weight, yi) if class_weight is not None else None
    n = X_train.shape[0]
    d = engine.cost_features(X_train)
    grams: tuple[np.ndarray, np.ndarray] | None = None
    previous: dict[int, tuple[np.ndarray, float]] = {}
    out: list[FoldScores] = []
    for C in Cs:
        if cancel is not None and cancel.is_set():
            Reporter(None, cancel).check()
        F_train = np.empty((n, len(targets)))
        F_test = np.empty((len(test), len(targets)))
        alphas, uppers = [], []
        for j, cls in enumerate(targets):
            ypm = np.where(yi == cls, 1.0, -1.0)
            # A kernel matrix pays where a kernel value costs more than a look-up: rbf and
            # poly (the demo's rbf curve: 0.73 x the time of one fit per C). For a linear
            # kernel on few columns LIBSVM's own dot products were as quick as the look-ups
            # and building the matrix cost more (tests/benchmarks/results/fold_speed.md).
            # Sparse (text) rows have no approximate rbf path: they are always solved exactly.
            exact = sp.issparse(X_train) or engine.choose_solver(n, d, kernel, C) == "exact"
            if kernel != "linear" and exact:
                if grams is None:
                    grams = (
                        _gram(X_train, X_train, kernel, gamma, degree),
                        _gram(X_test, X_train, kernel, gamma, degree),
                    )
                f, f_test, alpha, upper = _exact_on_gram(grams[0], grams[1], ypm, C, weight)
            else:
                fit = engine.fit_binary(
                    X_train,
                    ypm,
                    C,
                    kernel=kernel,
                    gamma=gamma,
                    degree=degree,
                    sample_weight=weight,
                    init=previous.get(cls),
                )
                if fit.w is not None and fit._estimator is None:
                    previous[cls] = (fit.w, fit.intercept)
                f, f_test = fit.decision, fit.decision_function(X_test)
                alpha, upper = fit.alpha, fit.upper
            F_train[:, j], F_test[:, j] = f, f_test
            alphas.append(alpha)
            uppers.append(upper)
        if k == 2:
            F_train = np.column_stack([-F_train[:, 0], F_train[:, 0]])
            F_test = np.column_stack([-F_test[:, 0], F_test[:, 0]])
            row_alpha, row_upper = alphas[0], uppers[0]
        else:
            rows = np.arange(n)
            row_alpha = np.column_stack(alphas)[rows, yi]
            row_upper = np.column_stack(uppers)[rows, yi]
        pred = cols[np.argmax(F_test, axis=1)]
        m = margins_from_decision(F_train, yi)
        out.append(
            (
                float(accuracy_score(y_test, pred)),
                float(balanced_accuracy_score(y_test, pred)),
                int(np.sum(row_alpha >= row_upper * (1 - 1e-6))),
                int(np.sum(m < 0)),
            )
        )
    return out


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
    jobs: int | None = None,
    cluster: str | None = None,
) -> list[Candidate]:
    """Cross-validated scores across a log grid of C (and of gamma for rbf/poly).

    The same scores as ``cross_validate`` for each (C, gamma), computed one task per
    (gamma, fold) so a fold's fits share a kernel matrix and warm starts (``curve_fold``);
    the tasks run on ``jobs`` threads or a ``cluster``. On sparse X the rbf and poly curves
    are exact solves on the fold's kernel matrix (the approximate rbf path needs dense rows).
    """
    report = report or Reporter()
    gamma_list = gammas or (resolve_gamma("scale", X),)
    if kernel == "linear":
        gamma_list = (resolve_gamma("scale", X),)
    scores = _grid_scores(
        X,
        y_idx,
        kernel=kernel,
        Cs=tuple(float(c) for c in Cs),
        gammas=tuple(float(g) for g in gamma_list),
        degree=degree,
        class_weight=class_weight,
        folds=folds,
        seed=seed,
        report=report,
        jobs=jobs,
        cluster=cluster,
        message=lambda done, total: f"C curve: {kernel}, {done} of {total} fold sweeps",
    )
    out: list[Candidate] = []
    for gi, g in enumerate(gamma_list):
        for ci, c in enumerate(Cs):
            out.append(_candidate(kernel, float(c), float(g), scores[gi][ci]))
    return out


def _grid_scores(
    X: Any,
    y_idx: np.ndarray,
    *,
    kernel: str,
    Cs: tuple[float, ...],
    gammas: tuple[float, ...],
    degree: int,
    class_weight: str | None,
    folds: int,
    seed: int,
    report: Reporter,
    jobs: int | None,
    cluster: str | None,
    message: Any = None,
) -> list[list[list[FoldScores]]]:
    """scores[gamma][C][fold] over stratified folds, one task per (gamma, fold)."""
    splitter = StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed)
    splits = list(splitter.split(np.zeros(len(y_idx)), y_idx))
    tasks = [(g, train, test) for g in gammas for train, test in splits]
    results = run_tasks(
        _curve_task,
        (X, y_idx, kernel, degree, class_weight, Cs, report.cancel if cluster is None else None),
        tasks,
        jobs=jobs,
        cluster=cluster,
        report=report,
        message=message,
    )
    k = len(splits)
    return [
        [[results[gi * k + f][ci] for f in range(k)] for ci in range(len(Cs))]
        for gi in range(len(gammas))
    ]


def _curve_task(
    X: Any,
    y_idx: np.ndarray,
    kernel: str,
    degree: int,
    class_weight: str | None,
    Cs: tuple[float, ...],
    cancel: Any,
    gamma: float,
    train: np.ndarray,
    test: np.ndarray,
) -> list[FoldScores]:
    return curve_fold(X, y_idx, kernel, gamma, degree, class_weight, Cs, cancel, train, test)


def _candidate(kernel: str, C: float, gamma: float, folds: list[FoldScores]) -> Candidate:
    acc, bal, bound, wrong = (np.array(v, dtype=float) for v in zip(*folds, strict=True))
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
    jobs: int | None = None,
    cluster: str | None = None,
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
        jobs=jobs,
        cluster=cluster,
    )
    return {
        "kernel": kernel,
        "candidates": candidates,
        "n_rows": len(keep),
        "sampled": len(keep) < len(rows),
        "folds": folds,
    }
