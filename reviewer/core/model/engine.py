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
from sklearn.svm import SVC

from reviewer.core.errors import InputError
from reviewer.core.progress import Reporter
from reviewer.core.values import (
    DEFAULT_C,
)

# Above this many fitted rows, solver="auto" switches to the approximate large-n solvers.
EXACT_LIMIT = 20_000
# LIBSVM's linear solve slows sharply with n on overlapping classes (34 s for a 10,000-row
# scan here against 0.3 s for liblinear); the primal Newton solver reaches the same objective
# to a certified 1e-3 gap, so linear problems switch to it much earlier.
LINEAR_EXACT_LIMIT = 5_000
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

    def decision_function(self, X: np.ndarray) -> np.ndarray:
        if self.w is not None and self._estimator is None:
            return X @ self.w + self.intercept
        return _chunked(self._estimator.decision_function, X)


def _chunked(fn, X: np.ndarray, rows: int = 50_000) -> np.ndarray:
    if len(X) <= rows:
        return np.asarray(fn(X), dtype=float).ravel()
    return np.concatenate(
        [np.asarray(fn(X[i : i + rows]), dtype=float).ravel() for i in range(0, len(X), rows)]
    )


def resolve_gamma(gamma: float | str, X: np.ndarray) -> float:
    """'scale' is 1 / (n_features * Var(X)), the rule scikit-learn's SVC uses."""
    if gamma == "scale":
        var = float(X.var()) if X.size else 0.0
        return 1.0 / (X.shape[1] * var) if var > 0 else 1.0
    return float(gamma)


def fit_binary(
    X: np.ndarray,
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
) -> BinaryFit:
    """Fit one soft-margin problem exactly (LIBSVM) or, for large n, approximately.

    ``max_iter`` caps LIBSVM's iterations (None: the module's MAX_ITER, -1: no cap).
    """
    n = len(ypm)
    s = np.ones(n) if sample_weight is None else np.asarray(sample_weight, dtype=float)
    large_kernel = kernel in ("linear", "rbf")
    limit = LINEAR_EXACT_LIMIT if kernel == "linear" else EXACT_LIMIT
    if large_kernel and (solver == "approximate" or (solver == "auto" and n > limit)):
        return fit_binary_large(X, ypm, C, kernel=kernel, gamma=gamma, sample_weight=s)
    svc = SVC(
        kernel=kernel,
        C=C,
        gamma=gamma,
        degree=degree,
        coef0=POLY_COEF0 if kernel == "poly" else 0.0,
        tol=tol,
        cache_size=500,
        max_iter=MAX_ITER if max_iter is None else int(max_iter),
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        svc.fit(X, ypm, sample_weight=None if sample_weight is None else s)
    converged = not any("terminated early" in str(w.message) for w in caught)
    alpha = np.zeros(n)
    alpha[svc.support_] = np.abs(svc.dual_coef_[0])
    # SVC orders classes as [-1, +1]; its decision is positive for +1.
    f = np.asarray(svc.decision_function(X), dtype=float)
    b = float(svc.intercept_[0])
    # ||w||^2 = sum_i alpha_i y_i (f_i - b), exact when sum alpha_i y_i = 0; needs no kernel matrix.
    w_sq = max(float(np.sum(alpha * ypm * (f - b))), 0.0)
    hinge = np.maximum(0.0, 1.0 - ypm * f)
    primal = 0.5 * w_sq + C * float(np.sum(s * hinge))
    dual = float(np.sum(alpha)) - 0.5 * w_sq
    w = np.asarray(svc.coef_[0], dtype=float).copy() if kernel == "linear" else None
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


def fit_binary_large(
    X: np.ndarray,
    ypm: np.ndarray,
    C: float,
    *,
    kernel: str,
    gamma: float,
    sample_weight: np.ndarray,
) -> BinaryFit:
    """Large-n path. Linear: the same hinge-loss objective solved in the primal to a certified
    relative gap of 1e-3 (solvers.fit_linear_hinge). Rbf: a landmark Nystroem map with the
    same solver on top; its alpha are the values KKT ties to each row's margin."""
    from reviewer.core.model import solvers

    upper = C * sample_weight
    if kernel == "linear":
        res = solvers.fit_linear_hinge(X, ypm, C, sample_weight=sample_weight)
        f = X @ res.w + res.b
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
    approx = solvers.fit_rbf_approx(X, ypm, C, gamma, sample_weight=sample_weight)
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


class SoftMarginClassifier:
    """Soft-margin SVM, one problem per class against the rest (a single problem for two classes).

    Follows scikit-learn's estimator manners: settings stored as given, learned values end
    with ``_``, ``fit`` returns ``self``.
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

    def fit(
        self, X: np.ndarray, y: np.ndarray, report: Reporter | None = None
    ) -> SoftMarginClassifier:
        report = report or Reporter()
        y = np.asarray(y, dtype=object)
        self.classes_, y_idx = np.unique(y.astype(str), return_inverse=True)
        k = len(self.classes_)
        if k < 2:
            raise InputError(
                f"need at least two classes to fit; found {k} "
                f"({', '.join(map(str, self.classes_))})"
            )
        self.gamma_ = resolve_gamma(self.gamma, X)
        self.sample_weight_ = class_weights(y_idx, k) if self.class_weight == "balanced" else None
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
                    sample_weight=self.sample_weight_,
                    solver=self.solver,
                )
            )
        report(1.0, "fitted")
        self.y_idx_ = y_idx
        return self

    def decision_function(self, X: np.ndarray) -> np.ndarray:
        """(n, K) decision values; for two classes the columns are (-f, f)."""
        if len(self.classes_) == 2:
            f = self.problems_[0].decision_function(X)
            return np.column_stack([-f, f])
        return np.column_stack([p.decision_function(X) for p in self.problems_])

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


def class_weights(y_idx: np.ndarray, k: int) -> np.ndarray:
    """Per-row weights n / (K * n_class), scikit-learn's 'balanced' rule."""
    counts = np.bincount(y_idx, minlength=k).astype(float)
    per_class = len(y_idx) / (k * np.maximum(counts, 1.0))
    return per_class[y_idx]


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
            entry["w"] = [float(v) for v in p.w]
            entry["margin_width"] = 2.0 / norm if norm > 0 else float("inf")
        out.append(entry)
    return out


def elapsed(since: float) -> float:
    return round(time.perf_counter() - since, 4)
