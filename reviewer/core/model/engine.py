"""The margin engine: soft-margin fits and the per-row quantities the review is built on.

For a binary problem with y in {-1, +1} the soft-margin SVM (Cortes & Vapnik 1995) solves

    min 1/2 ||w||^2 + C * sum_i s_i xi_i   s.t.  y_i f(x_i) >= 1 - xi_i,  xi_i >= 0

with f(x) = w.phi(x) + b and per-row weights s_i (class weights, default 1). Its dual has
0 <= alpha_i <= C s_i and sum_i alpha_i y_i = 0. Per row we report

* margin  m_i = y_i f(x_i); with K > 2 classes (one problem per class against the rest)
  m_i = f_y(x_i) - max_{k != y} f_k(x_i), halved for K = 2 so it equals y_i f(x_i);
* slack   xi_i = max(0, 1 - m_i);
* zone    wrong_side (xi > 1), inside_margin (0 < xi <= 1), clear (xi = 0);
* alpha   the row's dual coefficient in its given class's problem, and its support kind:
  non_support (alpha = 0), margin_support (0 < alpha < C s_i), bound_support (alpha = C s_i).
"""

from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.svm import SVC
from sklearn.utils.class_weight import compute_sample_weight
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import _check_sample_weight, check_is_fitted, validate_data

from reviewer.core.errors import InputError, SettingsError
from reviewer.core.progress import Reporter
from reviewer.core.values import DEFAULT_C, KERNELS

# solver="auto" picks the solver by predicted cost, not by a row count. Measured on real tables
# (tests/benchmarks/results/solver_speed.md, real_tables.md): LIBSVM's linear solve needs a
# number of iterations that grows with n * C on overlapping classes (4,000 x 85 rows of
# Caravan: 7 s at C=1, no convergence in 29 s at C=10) while the primal Newton solver takes
# 0.1 s to a certified 1e-3 gap, so linear problems go to the primal solver once
# n * max(C, 1) passes LINEAR_EXACT_WORK. An exact RBF solve is quick while its kernel matrix
# fits LIBSVM's cache (4,000 x 85: 0.5 s) and slow once it does not (20,000 x 20: 41 s), and
# large C adds iterations; it is used up to RBF_EXACT_ROWS rows (n^2 doubles in the cache) and
# n^2 * d * sqrt(max(C, 1)) <= RBF_EXACT_WORK, the Nystroem map beyond.
LINEAR_EXACT_WORK = 2_500
# A fit predicted to take longer than this says so in its progress and summary notes.
SLOW_SCAN_SECONDS = 60.0
# Problems this small stay exact whatever C: exact alpha (KKT) matter more than a second.
EXACT_ROWS_ALWAYS = 500
RBF_EXACT_WORK = 1e10
KERNEL_CACHE_MB = 500
RBF_EXACT_ROWS = int(np.sqrt(KERNEL_CACHE_MB * 1e6 / 8))
# Relative tolerance for calling alpha "at the bound" or "zero" (LIBSVM stores exact bounds).
ALPHA_RTOL = 1e-6
# Slack at or below this counts as zero for the zone: LIBSVM stops at a dual-gradient tolerance
# of 1e-4, which leaves rows that sit on the margin with slack of order 1e-5, not exactly 0.
ZONE_TOL = 1e-3
# Poly kernel (gamma x.z + coef0)^degree; coef0 = 1 keeps lower-order terms (common practice).
POLY_COEF0 = 1.0
# Iteration cap handed to LIBSVM; -1 means none. A capped fit that stops early is reported
# as not converged (BinaryFit.converged, the problem summary and a note in the fit summary).
MAX_ITER = -1
# Above EXACT_ROWS_ALWAYS rows LIBSVM stops after this many iterations per row (a converged
# rbf fit of 3,200 noisy Default rows at C=10 took 72 per row).
ITERATIONS_PER_ROW = 200


@dataclass
class BinaryFit:
    """One soft-margin problem (a class against the rest, or the two classes of a binary task)."""

    alpha: np.ndarray  # dual coefficients, one per fitted row
    upper: np.ndarray  # C * s_i, the box bound of each alpha
    decision: np.ndarray  # f(x_i) on the fitted rows
    intercept: float
    w: np.ndarray | None  # weight vector for the linear kernel
    primal: float
    dual: float
    solver: str
    converged: bool = True
    n_iter: int | None = None
    _estimator: Any = field(default=None, repr=False)

    def decision_function(self, X: np.ndarray | sp.spmatrix) -> np.ndarray:
        """f(x) for the rows of X (dense, or scipy.sparse CSR)."""
        if self.w is not None:
            return np.asarray(X @ self.w, dtype=float).ravel() + self.intercept
        return _chunked(self._estimator.decision_function, X)


def _chunked(fn, X: np.ndarray | sp.spmatrix, rows: int = 50_000) -> np.ndarray:
    n = X.shape[0]
    if n <= rows:
        return np.asarray(fn(X), dtype=float).ravel()
    return np.concatenate(
        [np.asarray(fn(X[i : i + rows]), dtype=float).ravel() for i in range(0, n, rows)]
    )


def resolve_gamma(gamma: float | str, X: np.ndarray | sp.spmatrix) -> float:
    """'scale' is 1 / (n_features * Var(X)), the rule scikit-learn's SVC uses.

    Var(X) is the variance of all n * d entries, zeros included; for sparse X it is
    E[x^2] - E[x]^2 over the stored values (as scikit-learn computes it), never densified.
    """
    if gamma == "scale":
        n, d = X.shape
        if n * d == 0:
            return 1.0
        if sp.issparse(X):
            Xc = sp.csr_matrix(X)
            Xc.sum_duplicates()
            data = Xc.data
            mean = float(data.sum()) / (n * d)
            var = max(float(data @ data) / (n * d) - mean * mean, 0.0)
        else:
            var = float(X.var())
        return 1.0 / (d * var) if var > 0 else 1.0
    return float(gamma)


def cost_features(X: np.ndarray | sp.spmatrix) -> int:
    """Features that count for a kernel solver's cost: d for dense X; for sparse X the mean
    stored values per row, since LIBSVM's sparse kernel products cost that much."""
    n, d = X.shape
    if sp.issparse(X):
        return max(1, int(np.ceil(sp.csr_matrix(X).nnz / max(n, 1))))
    return int(d)


def predicted_exact_work(n: int, d: int, kernel: str, C: float) -> float:
    """Relative cost of an exact LIBSVM solve, in the units of its kernel's budget."""
    if kernel == "linear":
        return n * max(float(C), 1.0)
    return float(n) * n * max(d, 1) * np.sqrt(max(float(C), 1.0))


def is_sparse(X: object) -> bool:
    """Whether X is a scipy.sparse matrix (text features)."""
    return bool(sp.issparse(X))


def choose_solver(n: int, d: int, kernel: str, C: float, *, sparse: bool = False) -> str:
    """'exact' or 'approximate' for one binary problem of n rows and d features.

    Poly has no approximate path and stays exact. A linear problem on sparse (text) rows
    goes to the primal solver above EXACT_ROWS_ALWAYS rows: on the 3,000 work orders of the
    text demo (7,114 TF-IDF features, 162 stored values a row) LIBSVM took 2.4-3.1 s a fit
    where the primal solver took 0.2-0.6 s to a certified 1e-3 gap.
    """
    if n <= EXACT_ROWS_ALWAYS:
        return "exact"
    if kernel == "linear" and sparse:
        return "approximate"
    if kernel == "linear":
        cheap = predicted_exact_work(n, d, kernel, C) <= LINEAR_EXACT_WORK
        return "exact" if cheap else "approximate"
    if kernel == "rbf":
        cheap = n <= RBF_EXACT_ROWS and predicted_exact_work(n, d, kernel, C) <= RBF_EXACT_WORK
        return "exact" if cheap else "approximate"
    return "exact"


def predicted_scan_seconds(
    n: int, d: int, k: int, kernel: str, C: float, folds: int, *, sparse: bool = False
) -> float:
    """Rough wall time of a scan (full fit plus held-out folds) on 2 cores, from the
    measurements in tests/benchmarks/results/scan_grid_speed.md; for warnings, not promises.
    For sparse rows ``d`` is the stored values per row (``cost_features``)."""
    problems = 1 if k == 2 else k

    def one(rows: int) -> float:
        solver = choose_solver(rows, d, kernel, C, sparse=sparse)
        if solver == "approximate":
            # Measured on resampled Caravan, 85 columns: primal 1.5 s, Nystroem 7-13 s a fit
            # at 40,000 rows (more Newton steps at large C). Sparse rows: in proportion to
            # their stored values.
            per = 1.5 if kernel == "linear" else 7.0 * max(float(C), 1.0) ** 0.15
            if sparse:
                per *= max(d, 1) / 85
            return per * rows / 40_000 + 0.05
        cached = rows <= RBF_EXACT_ROWS
        per_gig = 0.4 if cached else 5.0
        return per_gig * predicted_exact_work(rows, d, "rbf", C) / 1e9 + 0.01

    # One fit on every row, then one per fold on (folds - 1) / folds of them.
    fold_rows = int(n * (folds - 1) / folds) if folds else 0
    return problems * (one(n) + folds * one(fold_rows))


def fit_binary(
    X: np.ndarray | sp.spmatrix,
    ypm: np.ndarray,
    C: float,
    *,
    kernel: str = "linear",
    gamma: float = 1.0,
    degree: int = 3,
    sample_weight: np.ndarray | None = None,
    solver: str = "auto",
    tol: float = 1e-4,
    max_iter: int | None = None,
    init: tuple[np.ndarray, float] | None = None,
) -> BinaryFit:
    """Fit one soft-margin problem exactly (LIBSVM) or, for large n, approximately.

    ``max_iter`` caps LIBSVM's iterations (None: the module's MAX_ITER, -1: no cap).
    ``init`` is a (w, b) starting point for the primal linear solver; the exact dual and the
    Nystroem path ignore it.
    """
    n = len(ypm)
    s = np.ones(n) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    if solver == "auto":
        solver = choose_solver(n, cost_features(X), kernel, C, sparse=sp.issparse(X))
    if kernel == "rbf" and solver == "approximate" and sp.issparse(X):
        # The Nystroem path needs dense rows (k-means landmarks, a dense map); text matrices
        # have tens of thousands of columns, so it is refused rather than densified.
        raise SettingsError(
            f"the rbf kernel on sparse (text) features is fitted exactly only up to "
            f"{RBF_EXACT_ROWS:,} rows and within its cost budget; this fit has {n:,} rows: "
            f"use the linear kernel (the usual choice for text) or a sample of the rows"
        )
    if kernel in ("linear", "rbf") and solver == "approximate":
        return fit_binary_large(X, ypm, C, kernel=kernel, gamma=gamma, sample_weight=s, init=init)
    svc = SVC(
        kernel=kernel,
        C=C,
        gamma=gamma,
        degree=degree,
        coef0=POLY_COEF0 if kernel == "poly" else 0.0,
        tol=tol,
        cache_size=KERNEL_CACHE_MB,
        max_iter=iteration_cap(n) if max_iter is None else int(max_iter),
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        svc.fit(X, ypm, sample_weight=None if sample_weight is None else s)
    converged = not any("terminated early" in str(w.message) for w in caught)
    alpha = np.zeros(n)
    # On sparse input scikit-learn stores dual_coef_ and coef_ as sparse matrices.
    dual_coef = svc.dual_coef_.toarray() if sp.issparse(svc.dual_coef_) else svc.dual_coef_
    alpha[svc.support_] = np.abs(dual_coef[0])
    # SVC orders classes as [-1, +1]; its decision is positive for +1.
    b = float(svc.intercept_[0])
    w = None
    if kernel == "linear":
        coef = svc.coef_.toarray() if sp.issparse(svc.coef_) else svc.coef_
        w = np.asarray(coef[0], dtype=float).copy()
        # x.w + b is the same value as LIBSVM's sum over support vectors, in one pass.
        f = np.asarray(X @ w, dtype=float).ravel() + b
    else:
        f = np.asarray(svc.decision_function(X), dtype=float)
    # ||w||^2 = sum_i alpha_i y_i (f_i - b), exact when sum alpha_i y_i = 0; needs no kernel matrix.
    w_sq = max(float(np.sum(alpha * ypm * (f - b))), 0.0)
    hinge = np.maximum(0.0, 1.0 - ypm * f)
    primal = 0.5 * w_sq + C * float(np.sum(s * hinge))
    dual = float(np.sum(alpha)) - 0.5 * w_sq
    return BinaryFit(
        alpha=alpha,
        upper=C * s,
        decision=f,
        intercept=b,
        w=w,
        primal=primal,
        dual=dual,
        solver="exact (LIBSVM dual)",
        converged=converged,
        n_iter=int(np.sum(svc.n_iter_)) if hasattr(svc, "n_iter_") else None,
        _estimator=svc,
    )


def iteration_cap(n: int) -> int:
    """LIBSVM's iteration cap for an n-row problem: MAX_ITER if set, none up to
    EXACT_ROWS_ALWAYS rows, else ITERATIONS_PER_ROW * n. On noisy overlapping classes at large
    C LIBSVM can need thousands of iterations per row (ISLR Default with 10% flips: a 1,000-row
    tuning sample at C=100 dominated a minute-long auto); a capped fit is reported as not
    converged."""
    if MAX_ITER != -1 or n <= EXACT_ROWS_ALWAYS:
        return MAX_ITER
    return ITERATIONS_PER_ROW * n


def nystroem_components(n: int) -> int:
    """Landmarks for the Nystroem map: 500 up to 10,000 rows, then fewer (as 1/sqrt(n), at
    least 200) so a fold fit stays within seconds. Each Newton step costs about rows in the
    margin band x landmarks^2; on 40,000 resampled Caravan rows 500 landmarks took 8-13 s a
    fit (43-92 steps)."""
    if n <= 10_000:
        return 500
    return max(200, int(500 * np.sqrt(10_000 / n)))


def fit_binary_large(
    X: np.ndarray | sp.spmatrix,
    ypm: np.ndarray,
    C: float,
    *,
    kernel: str,
    gamma: float,
    sample_weight: np.ndarray,
    init: tuple[np.ndarray, float] | None = None,
) -> BinaryFit:
    """Large-n path. Linear: the same hinge-loss objective solved in the primal to a certified
    relative gap of 1e-3 (solvers.fit_linear_hinge; dense or sparse CSR X). Rbf: a landmark
    Nystroem map with the same solver on top (dense X only); its alpha are the values KKT
    ties to each row's margin."""
    from reviewer.core.model import solvers

    upper = C * sample_weight
    if kernel == "linear":
        res = solvers.fit_linear_hinge(X, ypm, C, sample_weight=sample_weight, init=init)
        f = np.asarray(X @ res.w, dtype=float).ravel() + res.b
        return BinaryFit(
            alpha=np.asarray(res.alpha, dtype=float),
            upper=upper,
            decision=f,
            intercept=float(res.b),
            w=np.asarray(res.w, dtype=float),
            primal=float(res.primal),
            dual=float(res.dual),
            solver=f"primal Newton on the hinge loss (relative gap {res.gap:.1e})",
            converged=bool(res.converged),
            n_iter=int(res.n_iter),
        )
    approx = solvers.fit_rbf_approx(
        X, ypm, C, gamma, sample_weight=sample_weight, n_components=nystroem_components(len(ypm))
    )
    f = approx.decision_function(X)
    m = ypm * f
    alpha = np.where(m < 1.0, upper, np.where(m > 1.0, 0.0, 0.5 * upper))
    return BinaryFit(
        alpha=alpha,
        upper=upper,
        decision=f,
        intercept=float(approx.intercept),
        w=None,
        primal=float(approx.fit.primal),
        dual=float(approx.fit.dual),
        solver=f"approximate: Nystroem map, {approx.landmarks.shape[0]} k-means landmarks",
        converged=bool(approx.fit.converged),
        n_iter=int(approx.fit.n_iter),
        _estimator=approx,
    )


class SingleClassError(InputError, ValueError):
    """Fewer than two classes to fit; a ValueError too, as scikit-learn's conventions expect."""


class SoftMarginClassifier(ClassifierMixin, BaseEstimator):
    """Soft-margin SVM, one problem per class against the rest (a single problem for two classes).

    A scikit-learn estimator: settings are stored as given, learned values end with ``_``,
    ``fit`` returns ``self``, and it can be cloned, cross-validated and grid-searched.
    ``decision_function`` follows scikit-learn's shape rule (one column for two classes);
    ``decision_matrix`` always has one column per class, which is what margins need.
    ``class_weight="balanced"`` gives each row n / (K * n_class) times C
    (scikit-learn's compute_sample_weight), multiplied by any ``sample_weight``.
    """

    def __init__(
        self,
        kernel: str = "rbf",
        C: float = DEFAULT_C,
        gamma: float | str = "scale",
        degree: int = 3,
        class_weight: str | None = None,
        solver: str = "auto",
    ) -> None:
        self.kernel = kernel
        self.C = C
        self.gamma = gamma
        self.degree = degree
        self.class_weight = class_weight
        self.solver = solver

    def __sklearn_tags__(self) -> Any:
        tags = super().__sklearn_tags__()
        tags.input_tags.sparse = True  # CSR (TF-IDF) input is fitted without densifying
        return tags

    def fit(
        self,
        X: np.ndarray,
        y: np.ndarray,
        sample_weight: np.ndarray | None = None,
        report: Reporter | None = None,
        init: dict[int, tuple[np.ndarray, float]] | None = None,
    ) -> SoftMarginClassifier:
        """Fit one problem per class; ``init`` maps a class position (the positive class's
        index in ``classes_``) to a (w, b) starting point for the primal linear solver."""
        report = report or Reporter()
        if self.kernel not in KERNELS:
            raise SettingsError(f"kernel {self.kernel!r} is not one of {', '.join(KERNELS)}")
        if not (np.isfinite(self.C) and self.C > 0):
            raise SettingsError(f"C must be a positive number, got {self.C!r}")
        X, y = validate_data(self, X, y, dtype=np.float64, accept_sparse="csr")
        check_classification_targets(y)
        self.classes_, y_idx = np.unique(y, return_inverse=True)
        k = len(self.classes_)
        if k < 2:
            raise SingleClassError(
                f"need at least two classes to fit; found {k} class "
                f"({', '.join(map(str, self.classes_))})"
            )
        # A linear kernel has no gamma: skip the pass over X that 'scale' would take.
        self.gamma_ = 1.0 if self.kernel == "linear" else resolve_gamma(self.gamma, X)
        weight = None
        if self.class_weight is not None:
            weight = compute_sample_weight(self.class_weight, y_idx)
        if sample_weight is not None:
            sw = _check_sample_weight(sample_weight, X)
            weight = sw if weight is None else weight * sw
        self.sample_weight_ = weight
        targets = [1] if k == 2 else list(range(k))
        self.problems_: list[BinaryFit] = []
        for j, cls in enumerate(targets):
            report(j / len(targets), f"fitting {self.classes_[cls]} against the rest")
            ypm = np.where(y_idx == cls, 1.0, -1.0)
            self.problems_.append(
                fit_binary(
                    X,
                    ypm,
                    self.C,
                    kernel=self.kernel,
                    gamma=self.gamma_,
                    degree=self.degree,
                    sample_weight=weight,
                    solver=self.solver,
                    init=None if init is None else init.get(int(cls)),
                )
            )
        report(1.0, "fitted")
        self.y_idx_ = y_idx
        return self

    def decision_matrix(self, X: np.ndarray) -> np.ndarray:
        """(n, K) decision values; for two classes the columns are (-f, f)."""
        check_is_fitted(self)
        X = validate_data(self, X, dtype=np.float64, accept_sparse="csr", reset=False)
        if len(self.classes_) == 2:
            f = self.problems_[0].decision_function(X)
            return np.column_stack([-f, f])
        return np.column_stack([p.decision_function(X) for p in self.problems_])

    def decision_function(self, X: np.ndarray) -> np.ndarray:
        """f(x) for two classes (positive for ``classes_[1]``), else one column per class."""
        F = self.decision_matrix(X)
        return F[:, 1] if len(self.classes_) == 2 else F

    def predict(self, X: np.ndarray) -> np.ndarray:
        F = self.decision_matrix(X)
        return self.classes_[np.argmax(F, axis=1)]

    def training_decision(self) -> np.ndarray:
        if len(self.classes_) == 2:
            f = self.problems_[0].decision
            return np.column_stack([-f, f])
        return np.column_stack([p.decision for p in self.problems_])

    def row_alpha(self) -> tuple[np.ndarray, np.ndarray]:
        """(alpha, upper bound) of each fitted row in its given class's problem."""
        if len(self.classes_) == 2:
            p = self.problems_[0]
            return p.alpha, p.upper
        alpha = np.empty(len(self.y_idx_))
        upper = np.empty(len(self.y_idx_))
        for cls, p in enumerate(self.problems_):
            rows = self.y_idx_ == cls
            alpha[rows] = p.alpha[rows]
            upper[rows] = p.upper[rows]
        return alpha, upper


def margins_from_decision(F: np.ndarray, y_idx: np.ndarray) -> np.ndarray:
    """Margin of each row's given class against its best rival; NaN where the label is unknown.

    ``y_idx`` holds -1 for rows without a usable label. Columns of F that are NaN (a class
    missing from a fold's training rows) never act as rivals.
    """
    n, k = F.shape
    out = np.full(n, np.nan)
    ok = (y_idx >= 0) & (y_idx < k)
    if not ok.any():
        return out
    rows = np.flatnonzero(ok)
    own = F[rows, y_idx[rows]]
    rivals = F[rows].copy()
    rivals[np.arange(len(rows)), y_idx[rows]] = -np.inf
    rivals = np.where(np.isnan(rivals), -np.inf, rivals)
    best = rivals.max(axis=1)
    m = own - best
    if k == 2:
        m = m / 2.0
    m[~np.isfinite(m)] = np.nan
    out[rows] = m
    return out


def zones_from_slack(slack: np.ndarray) -> np.ndarray:
    zone = np.full(len(slack), "", dtype=object)
    finite = np.isfinite(slack)
    zone[finite & (slack > 1.0)] = "wrong_side"
    zone[finite & (slack > ZONE_TOL) & (slack <= 1.0)] = "inside_margin"
    zone[finite & (slack <= ZONE_TOL)] = "clear"
    return zone


def support_kinds(alpha: np.ndarray, upper: np.ndarray) -> np.ndarray:
    kind = np.full(len(alpha), "", dtype=object)
    finite = np.isfinite(alpha)
    at_zero = finite & (alpha <= ALPHA_RTOL * upper)
    at_bound = finite & (alpha >= upper * (1 - ALPHA_RTOL))
    kind[at_zero] = "non_support"
    kind[finite & ~at_zero & ~at_bound] = "margin_support"
    kind[at_bound & ~at_zero] = "bound_support"
    return kind


# The summary (saved in the session file as JSON) lists w only up to this many features; a
# text fit with 100,000 TF-IDF columns keeps w on the in-memory BinaryFit only.
SUMMARY_W_MAX = 2000


def problem_summaries(model: SoftMarginClassifier) -> list[dict[str, Any]]:
    targets = [model.classes_[1]] if len(model.classes_) == 2 else list(model.classes_)
    out = []
    for cls, p in zip(targets, model.problems_, strict=True):
        entry: dict[str, Any] = {
            "positive_class": str(cls),
            "primal": p.primal,
            "dual": p.dual,
            "intercept": p.intercept,
            "solver": p.solver,
            "converged": bool(p.converged),
            "n_iter": p.n_iter,
            "n_support": int(np.sum(p.alpha > ALPHA_RTOL * p.upper)),
        }
        if p.w is not None:
            norm = float(np.linalg.norm(p.w))
            if p.w.shape[0] <= SUMMARY_W_MAX:
                entry["w"] = [float(v) for v in p.w]
            entry["margin_width"] = 2.0 / norm if norm > 0 else float("inf")
        out.append(entry)
    return out


def elapsed(since: float) -> float:
    return round(time.perf_counter() - since, 4)
