"""Soft-margin solvers for large tables: linear hinge with a free intercept, and an RBF map.

The linear objective is the soft-margin primal (Cortes & Vapnik 1995) with an unpenalised
intercept b:

    P(w, b) = 1/2 ||w||^2 + C * sum_i s_i * max(0, 1 - y_i (w.x_i + b)).

`fit_linear_hinge` minimises a smoothed copy of it with a Newton method and shrinks the
smoothing until a true duality gap certifies the answer. The hinge is replaced by a
quadratic on the band |1 - m| < h (m the row's margin). Its derivative is a box-feasible
dual coefficient alpha_i = C s_i clip((1 + h - m_i) / (2h), 0, 1); at the smoothed optimum
w = sum alpha_i y_i x_i and sum alpha_i y_i = 0, so alpha is a dual point. After a tiny
repair of the equality constraint, the dual objective sum(alpha) - 1/2 ||sum alpha y x||^2
is a true lower bound on min P, and the reported gap compares it with the true (unsmoothed)
primal value. Each Newton step costs two passes over X; the Hessian only involves the rows
in the band, which are few when n >> d.

With many features (d > CG_FEATURES) or a scipy.sparse X (TF-IDF text) the (d+1) x (d+1)
Hessian is never formed: the Newton system is solved inexactly by preconditioned conjugate
gradients with Hessian-vector products on the band rows, the truncated Newton idea of
trust-region Newton for linear SVMs (Lin, Weng & Keerthi 2008, JMLR 9). The objective, the
free intercept, the line search and the gap certificate are the same, so the answer is
certified to the same tolerance; only the route to it differs. X is never densified.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import scipy.sparse as sp

from reviewer.core.errors import SettingsError

__all__ = [
    "LinearHingeResult",
    "RbfApproximation",
    "dual_objective",
    "fit_linear_hinge",
    "fit_rbf_approx",
    "hinge_primal",
    "project_alpha_feasible",
]

# Above this many features (or on sparse X) Newton steps are solved by conjugate gradients
# instead of a dense (d+1) x (d+1) factorisation. Measured (tests/benchmarks/
# sparse_solver_speed.py, results/sparse_solver_speed.md "dense d switch"): on ISLR Caravan,
# real and ill-conditioned, CG took 2.8x the direct time at 85 columns and 1.8x at 609
# (twice the Newton steps); on random data CG was faster from 200 columns, and at 1,000
# columns it took 0.53x.
CG_FEATURES = 1000
# Conjugate gradients stop once the residual is below CG_FORCING times the gradient (an
# inexact Newton step; the outer loop's certified gap decides when the fit is done), or
# after CG_MAX_ITER products.
CG_FORCING = 0.1
CG_MAX_ITER = 250


@dataclass
class LinearHingeResult:
    """Outcome of `fit_linear_hinge`; gap is (primal - dual) / |primal|."""

    w: np.ndarray
    b: float
    alpha: np.ndarray
    primal: float
    dual: float
    gap: float
    n_iter: int
    converged: bool
    smoothing: float = 0.0
    history: list[tuple[int, float, float]] = field(default_factory=list, repr=False)


def _check_inputs(
    X: np.ndarray | sp.spmatrix, y: np.ndarray, C: float, sample_weight: np.ndarray | None
) -> tuple[np.ndarray | sp.csr_matrix, np.ndarray, np.ndarray]:
    if sp.issparse(X):
        X = sp.csr_matrix(X, dtype=np.float64)
    else:
        X = np.asarray(X)
        if X.ndim != 2:
            raise SettingsError(f"X must be a 2-D feature matrix, got shape {X.shape}")
        if X.dtype != np.float64:
            X = X.astype(np.float64)
    y = np.asarray(y, dtype=np.float64).ravel()
    if y.shape[0] != X.shape[0]:
        raise SettingsError(f"y has {y.shape[0]} rows but X has {X.shape[0]}")
    bad = ~np.isin(y, (-1.0, 1.0))
    if bad.any():
        raise SettingsError(f"labels must be -1 or +1; found {y[bad][0]!r}")
    if not (np.isfinite(C) and C > 0):
        raise SettingsError(f"C must be a positive number, got {C!r}")
    if sample_weight is None:
        s = np.ones(X.shape[0])
    else:
        s = np.asarray(sample_weight, dtype=np.float64).ravel()
        if s.shape[0] != X.shape[0]:
            raise SettingsError(f"sample_weight has {s.shape[0]} entries but X has {X.shape[0]}")
        if (s < 0).any() or not np.isfinite(s).all():
            raise SettingsError("sample_weight must be finite and non-negative")
    return X, y, s


def hinge_primal(
    X: np.ndarray | sp.spmatrix,
    y: np.ndarray,
    w: np.ndarray,
    b: float,
    C: float,
    s: np.ndarray | None = None,
) -> float:
    """The true (unsmoothed) soft-margin primal value P(w, b)."""
    slack = np.maximum(0.0, 1.0 - y * (X @ w + b))
    loss = slack.sum() if s is None else s @ slack
    return float(0.5 * (w @ w) + C * loss)


def dual_objective(X: np.ndarray | sp.spmatrix, y: np.ndarray, alpha: np.ndarray) -> float:
    """sum(alpha) - 1/2 ||sum alpha_i y_i x_i||^2; a lower bound on min P if alpha is feasible."""
    v = X.T @ (alpha * y)
    return float(alpha.sum() - 0.5 * (v @ v))


def project_alpha_feasible(alpha: np.ndarray, y: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Nearest point to alpha in {0 <= a <= upper, sum a y = 0}, moving free entries first.

    The equality is repaired by a shift a_i - lam * y_i, clipped to the box (Euclidean
    projection onto the constraint set, lam found by a bracketed root search). The shift is
    tried on the free entries (strictly inside the box) so that bound entries stay exactly at 0 or
    upper, as KKT asks; only when those cannot absorb the residual are all entries moved.
    """
    a = np.clip(np.asarray(alpha, dtype=np.float64), 0.0, upper)
    resid = float(a @ y)
    if resid == 0.0:
        return a
    free = (a > 0) & (a < upper)
    for idx in (np.flatnonzero(free), np.arange(a.shape[0])):
        if idx.size == 0:
            continue
        a_sub, y_sub, u_sub = a[idx], y[idx], upper[idx]
        # After the shift the subset must cancel the rest: sum_sub a y = -(resid - own part).
        target = float(a_sub @ y_sub) - resid

        def g(lam: float, a_sub=a_sub, y_sub=y_sub, u_sub=u_sub) -> float:
            return float(np.clip(a_sub - lam * y_sub, 0.0, u_sub) @ y_sub)

        # g decreases in lam and is piecewise linear; regula falsi with the Illinois
        # tweak lands in the right linear piece in a few evaluations.
        span = float(u_sub.max()) + float(np.abs(a_sub).max()) + 1.0
        lo, hi = -span, span
        f_lo, f_hi = g(lo) - target, g(hi) - target
        if not (f_hi <= 0.0 <= f_lo):
            continue
        best, f_best = (lo, f_lo) if abs(f_lo) < abs(f_hi) else (hi, f_hi)
        side = 0
        for _ in range(100):
            if f_best == 0.0 or hi - lo <= 1e-15 * span:
                break
            t = hi - f_hi * (hi - lo) / (f_hi - f_lo) if f_hi != f_lo else 0.5 * (lo + hi)
            if not (lo < t < hi):
                t = 0.5 * (lo + hi)
            f_t = g(t) - target
            if abs(f_t) < abs(f_best):
                best, f_best = t, f_t
            if f_t > 0:
                lo, f_lo = t, f_t
                if side == 1:
                    f_hi *= 0.5
                side = 1
            else:
                hi, f_hi = t, f_t
                if side == -1:
                    f_lo *= 0.5
                side = -1
        out = a.copy()
        out[idx] = np.clip(a_sub - best * y_sub, 0.0, u_sub)
        return out
    # Only one class carries weight: the only feasible point is alpha = 0.
    return np.zeros_like(a)


def _smoothed_alpha(m: np.ndarray, cs: np.ndarray, h: float) -> np.ndarray:
    return cs * np.clip((1.0 + h - m) / (2.0 * h), 0.0, 1.0)


def _smoothed_loss(m: np.ndarray, cs: np.ndarray, h: float) -> float:
    # Hinge with a quadratic joint on [1 - h, 1 + h]; it differs from the hinge by <= h/4.
    u = 1.0 - m
    quad = (u + h) ** 2 / (4.0 * h)
    val = np.where(u >= h, u, np.where(u <= -h, 0.0, quad))
    return float(cs @ val)


def _line_search(
    w: np.ndarray,
    dw: np.ndarray,
    m: np.ndarray,
    dm: np.ndarray,
    cs: np.ndarray,
    h: float,
) -> float:
    """Exact minimiser over t >= 0 of the convex piecewise quadratic phi(t) along the step."""
    ww, wd = float(w @ dw), float(dw @ dw)
    active = dm != 0.0
    m_a, dm_a, cs_a = m[active], dm[active], cs[active]

    def dphi(t: float) -> tuple[float, float]:
        mt = m_a + t * dm_a
        u = 1.0 - mt
        band = np.abs(u) < h
        a = cs_a * np.clip((u + h) / (2.0 * h), 0.0, 1.0)
        d1 = ww + t * wd - float(a @ dm_a)
        d2 = wd + float((cs_a[band] * dm_a[band] ** 2).sum()) / (2.0 * h)
        return d1, d2

    d0, _ = dphi(0.0)
    if d0 >= 0.0:
        return 0.0
    lo, hi = 0.0, 1.0
    dhi, _ = dphi(hi)
    while dhi < 0.0 and hi < 1e6:
        lo, hi = hi, hi * 4.0
        dhi, _ = dphi(hi)
    # Safeguarded Newton on phi'(t) = 0 inside [lo, hi].
    t = min(max(1.0, lo), hi)
    for _ in range(40):
        d1, d2 = dphi(t)
        if abs(d1) <= 1e-12 * abs(d0):
            return t
        if d1 < 0:
            lo = t
        else:
            hi = t
        t_new = t - d1 / d2 if d2 > 0 else 0.5 * (lo + hi)
        if not (lo < t_new < hi):
            t_new = 0.5 * (lo + hi)
        if hi - lo <= 1e-12 * max(1.0, hi):
            break
        t = t_new
    # phi' < 0 on [0, lo] by convexity, so lo is a guaranteed descent step.
    return lo if lo > 0 else t


def _weighted_sq_colsum(xb: np.ndarray | sp.csr_matrix, c: np.ndarray) -> np.ndarray:
    """sum_i c_i x_ij^2 per column j, without densifying a sparse xb or squaring all of
    either at once (a squared copy of a sparse xb would be as large as xb)."""
    out = np.zeros(xb.shape[1])
    if isinstance(xb, sp.csr_matrix):
        ptr = xb.indptr
        step = max(1, int(2**18 * xb.shape[0] / max(xb.nnz, 1)))  # ~260,000 values a slice
        for start in range(0, xb.shape[0], step):
            stop = min(start + step, xb.shape[0])
            lo, hi = int(ptr[start]), int(ptr[stop])
            if lo == hi:
                continue
            data = xb.data[lo:hi]
            weights = np.repeat(c[start:stop], np.diff(ptr[start : stop + 1])) * data * data
            out += np.bincount(xb.indices[lo:hi], weights=weights, minlength=xb.shape[1])
        return out
    for start in range(0, xb.shape[0], 4096):
        part = xb[start : start + 4096]
        out += c[start : start + 4096] @ (part * part)
    return out


def _newton_step_cg(
    X: np.ndarray | sp.csr_matrix,
    band: np.ndarray,
    c_all: np.ndarray,
    gw: np.ndarray,
    gb: float,
    ridge_b: float,
    forcing: float = CG_FORCING,
) -> tuple[np.ndarray, float]:
    """Inexact Newton step (dw, db) by preconditioned conjugate gradients.

    H = [[I + Xb^T diag(cb) Xb, Xb^T cb], [cb^T Xb, sum cb + ridge_b]] on the band rows Xb,
    applied as H (vw, vb) = (vw + Xb^T (cb * u), cb . u + ridge_b vb) with u = Xb vw + vb;
    the Jacobi (diagonal) preconditioner is 1 + sum_i cb_i x_ij^2 and sum cb + ridge_b.
    """
    if band.mean() < 0.5:
        # A copy of the band rows (under half of X): the Hessian products repeat over them.
        xb, cb = X[band], c_all[band]
    else:
        # Most rows are in the band: use X as it is, with zero weight outside the band.
        xb, cb = X, np.where(band, c_all, 0.0)
    diag_w = 1.0 + _weighted_sq_colsum(xb, cb)
    diag_b = float(cb.sum()) + ridge_b

    xbt = xb.T  # a CSR matrix's transpose is a CSC view of the same arrays (no copy)

    def hess(vw: np.ndarray, vb: float) -> tuple[np.ndarray, float]:
        u = np.asarray(xb @ vw).ravel() + vb
        cu = cb * u
        return vw + np.asarray(xbt @ cu).ravel(), float(cu.sum()) + ridge_b * vb

    g_norm = float(np.sqrt(gw @ gw + gb * gb))
    sol_w, sol_b = np.zeros_like(gw), 0.0
    rw, rb = -gw, -gb
    zw, zb = rw / diag_w, rb / diag_b
    pw, pb = zw.copy(), zb
    rz = float(rw @ zw + rb * zb)
    for _ in range(CG_MAX_ITER):
        hw, hb = hess(pw, pb)
        php = float(pw @ hw + pb * hb)
        if php <= 0.0:
            break
        a = rz / php
        sol_w += a * pw
        sol_b += a * pb
        rw -= a * hw
        rb -= a * hb
        if np.sqrt(rw @ rw + rb * rb) <= forcing * g_norm:
            break
        zw, zb = rw / diag_w, rb / diag_b
        rz_new = float(rw @ zw + rb * zb)
        beta = rz_new / rz
        pw = zw + beta * pw
        pb = zb + beta * pb
        rz = rz_new
    if not np.any(sol_w) and sol_b == 0.0:
        # No progress at all (H p . p <= 0 at once cannot happen for this H; guard anyway):
        # fall back to the preconditioned gradient.
        return -gw / diag_w, -gb / diag_b
    return sol_w, float(sol_b)


def fit_linear_hinge(
    X: np.ndarray | sp.spmatrix,
    y: np.ndarray,
    C: float,
    sample_weight: np.ndarray | None = None,
    *,
    tol: float = 1e-3,
    max_iter: int = 200,
    init: tuple[np.ndarray, float] | None = None,
    smoothing: float = 0.5,
    blas_threads: int | None = 1,
) -> LinearHingeResult:
    """Minimise the soft-margin primal with free intercept; stop at relative gap <= tol.

    X is (n, d) float, dense or scipy.sparse (used as CSR, never densified), y in {-1, +1},
    sample_weight s_i >= 0 scales row i's C (class weights). `init` is an optional (w, b)
    warm start. alpha in the result is the dual point behind the gap certificate: C*s_i for
    rows with margin below 1 - h, 0 above 1 + h, fractional only for rows within the final
    smoothing width h of the margin.
    `blas_threads` caps BLAS threads during the fit (None: leave as is). The passes are
    memory-bound matrix-vector products; one thread measured 5-7x faster than two on a
    busy 2-core machine (tests/benchmarks/solver_speed.py).
    """
    if blas_threads is None:
        return _fit_linear_hinge(X, y, C, sample_weight, tol, max_iter, init, smoothing)
    with _blas_controller().limit(limits=blas_threads, user_api="blas"):
        return _fit_linear_hinge(X, y, C, sample_weight, tol, max_iter, init, smoothing)


@functools.cache
def _blas_controller() -> Any:
    """One threadpoolctl controller for the process: finding the BLAS libraries anew on every
    fit (threadpool_limits) cost about 10 ms a call, a third of a 195-fit C curve."""
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def _fit_linear_hinge(
    X: np.ndarray | sp.spmatrix,
    y: np.ndarray,
    C: float,
    sample_weight: np.ndarray | None,
    tol: float,
    max_iter: int,
    init: tuple[np.ndarray, float] | None,
    smoothing: float,
) -> LinearHingeResult:
    X, y, s = _check_inputs(X, y, C, sample_weight)
    d = X.shape[1]
    if tol <= 0:
        raise SettingsError(f"tol must be positive, got {tol!r}")
    cs = C * s
    if init is None:
        w = np.zeros(d)
        pos, neg = cs[y > 0].sum(), cs[y < 0].sum()
        b = 1.0 if pos >= neg else -1.0
    else:
        w = np.asarray(init[0], dtype=np.float64).copy()
        b = float(init[1])
    h = float(smoothing)
    use_cg = sp.issparse(X) or d > CG_FEATURES
    sparse_x = sp.issparse(X)
    m = y * (np.asarray(X @ w).ravel() + b)
    history: list[tuple[int, float, float]] = []
    best: tuple[float, float, np.ndarray, float, np.ndarray, float] | None = None
    it = 0
    converged = False
    while it < max_iter:
        it += 1
        alpha = _smoothed_alpha(m, cs, h)
        ay = alpha * y
        nz = alpha > 0
        # On sparse X a pass over every row (zeros cost a multiply) rather than a copy of
        # the rows with alpha > 0 (up to half of X).
        v = X[nz].T @ ay[nz] if not sparse_x and nz.mean() < 0.5 else X.T @ ay
        # True certificate: primal of the hinge, dual of a feasible repair of alpha.
        a_feas = project_alpha_feasible(alpha, y, cs)
        diff = (a_feas - alpha) * y
        dnz = diff != 0
        v_feas = v + X[dnz].T @ diff[dnz] if dnz.any() else v
        dual = float(a_feas.sum() - 0.5 * (v_feas @ v_feas))
        ww = float(w @ w)
        primal = float(0.5 * ww + cs @ np.maximum(0.0, 1.0 - m))
        gap = (primal - dual) / max(abs(primal), 1e-300)
        history.append((it, primal, gap))
        if best is None or gap < best[0]:
            best = (gap, primal, w.copy(), b, a_feas, dual)
        if gap <= tol:
            converged = True
            break
        # The smoothed problem's own gap (Fenchel duality with the quadratic joint) and the
        # part of the true gap that only smaller smoothing can remove.
        frac = np.divide(alpha, cs, out=np.zeros_like(alpha), where=cs > 0)
        smooth_term = h * float(cs @ (frac * (1.0 - frac)))
        primal_h = 0.5 * ww + _smoothed_loss(m, cs, h)
        dual_h = float(alpha.sum() - 0.5 * (v @ v)) + smooth_term
        gap_h = primal_h - dual_h
        if gap_h <= 0.25 * tol * abs(primal) and smooth_term > 0.25 * tol * abs(primal):
            # Smoothing error shrinks like h^2 (band width times per-row error).
            ratio = np.sqrt(0.2 * tol * abs(primal) / smooth_term)
            h *= float(np.clip(ratio, 0.02, 0.5))
            continue
        gw = w - v
        gb = -float(ay.sum())
        band = np.abs(1.0 - m) < h
        # A tiny ridge on b keeps H invertible when no row sits in the band.
        ridge_b = 1e-10 * (1.0 + cs.sum())
        if use_cg:
            # Tighter steps as the certified gap closes (an Eisenstat-Walker-like forcing term).
            forcing = min(CG_FORCING, float(np.sqrt(max(gap, 0.0))))
            dw, db = _newton_step_cg(X, band, cs / (2.0 * h), gw, gb, ridge_b, forcing)
        else:
            xb = X[band]
            cb = cs[band] / (2.0 * h)
            H = np.empty((d + 1, d + 1))
            H[:d, :d] = (xb.T * cb) @ xb
            H[:d, :d] += np.eye(d)
            H[:d, d] = H[d, :d] = xb.T @ cb
            H[d, d] = cb.sum() + ridge_b
            g = np.append(gw, gb)
            try:
                step = -np.linalg.solve(H, g)
            except np.linalg.LinAlgError:
                step = -np.linalg.lstsq(H, g, rcond=None)[0]
            dw, db = step[:d], float(step[d])
        dm = y * (np.asarray(X @ dw).ravel() + db)
        t = _line_search(w, dw, m, dm, cs, h)
        if t == 0.0:
            h *= 0.5
            continue
        w = w + t * dw
        b = b + t * db
        m = m + t * dm
    assert best is not None
    gap, primal, w_best, b_best, a_best, dual = best
    return LinearHingeResult(
        w=w_best,
        b=float(b_best),
        alpha=a_best,
        primal=primal,
        dual=dual,
        gap=float(gap),
        n_iter=it,
        converged=converged,
        smoothing=h,
        history=history,
    )


def _rbf_kernel(A: np.ndarray, B: np.ndarray, gamma: float, b_sq: np.ndarray) -> np.ndarray:
    a_sq = np.einsum("ij,ij->i", A, A)
    d2 = a_sq[:, None] + b_sq[None, :] - 2.0 * (A @ B.T)
    np.maximum(d2, 0.0, out=d2)
    return np.exp(-gamma * d2, out=d2)


@dataclass
class RbfApproximation:
    """A fitted RBF soft-margin model on a Nystroem map with k-means landmarks.

    decision_function(x) = sum_j coef_j * exp(-gamma ||x - landmark_j||^2) + intercept.
    fit_rows holds the rows the linear solver saw (all rows unless subsampled), fit
    holds that solve's result (alpha, primal, dual, gap) in the mapped space.
    """

    landmarks: np.ndarray
    coef: np.ndarray
    intercept: float
    gamma: float
    fit_rows: np.ndarray
    fit: LinearHingeResult
    chunk_rows: int = 16384

    def decision_function(self, X: np.ndarray) -> np.ndarray:
        """Decision values, computed in row chunks so memory stays bounded."""
        X = np.asarray(X, dtype=np.float64)
        if X.ndim != 2 or X.shape[1] != self.landmarks.shape[1]:
            raise SettingsError(
                f"X must have {self.landmarks.shape[1]} feature columns, got shape {X.shape}"
            )
        out = np.empty(X.shape[0])
        l_sq = np.einsum("ij,ij->i", self.landmarks, self.landmarks)
        for start in range(0, X.shape[0], self.chunk_rows):
            part = X[start : start + self.chunk_rows]
            out[start : start + part.shape[0]] = (
                _rbf_kernel(part, self.landmarks, self.gamma, l_sq) @ self.coef + self.intercept
            )
        return out

    def alpha_from_margins(self, X: np.ndarray, y: np.ndarray, C: float) -> np.ndarray:
        """KKT-implied dual coefficients for any rows: C below margin 1, 0 above, C/2 at 1.

        The map's solve gives exact alpha only for `fit_rows`; for other rows this is the
        value KKT ties to the margin, which is what zones and support labels need.
        """
        m = np.asarray(y, dtype=np.float64) * self.decision_function(X)
        return np.where(m < 1.0, C, np.where(m > 1.0, 0.0, 0.5 * C))


def fit_rbf_approx(
    X: np.ndarray,
    y: np.ndarray,
    C: float,
    gamma: float,
    sample_weight: np.ndarray | None = None,
    n_components: int = 500,
    seed: int = 0,
    *,
    max_fit_rows: int = 100_000,
    tol: float = 1e-3,
    chunk_rows: int = 16384,
) -> RbfApproximation:
    """Approximate RBF soft-margin fit for large n; returns an `RbfApproximation`.

    Landmarks are k-means centres of a row sample (Zhang, Tsang & Kwok 2008 found them
    better than random rows for Nystroem). Rows are mapped through K_mm^{-1/2} in chunks and
    `fit_linear_hinge` solves the hinge problem with a free intercept there. Above
    `max_fit_rows` a stratified random subset is fitted with C scaled by n / subset size,
    so the loss term estimates the full table's; decision values cover every row.
    """
    from sklearn.cluster import KMeans

    if sp.issparse(X):
        raise SettingsError(
            "the approximate rbf fit needs dense features; sparse (text) features take the "
            "linear kernel"
        )
    X, y, s = _check_inputs(X, y, C, sample_weight)
    if not (np.isfinite(gamma) and gamma > 0):
        raise SettingsError(f"gamma must be a positive number, got {gamma!r}")
    if n_components < 2:
        raise SettingsError(f"n_components must be at least 2, got {n_components!r}")
    n = X.shape[0]
    rng = np.random.default_rng(seed)
    k = min(n_components, n)
    sample = rng.choice(n, size=min(n, max(10 * k, 10_000)), replace=False)
    km = KMeans(n_clusters=k, n_init=1, max_iter=20, random_state=seed).fit(X[sample])
    landmarks = km.cluster_centers_
    l_sq = np.einsum("ij,ij->i", landmarks, landmarks)
    eig, vec = np.linalg.eigh(_rbf_kernel(landmarks, landmarks, gamma, l_sq))
    keep = eig > 1e-10 * eig.max()
    # K_mm^{-1/2} on the well-conditioned part: phi(x) . phi(z) ~ k(x, z).
    root_inv = (vec[:, keep] / np.sqrt(eig[keep])) @ vec[:, keep].T

    if n > max_fit_rows:
        # Stratified: each class keeps its share, so class balance is unchanged.
        rows = np.concatenate(
            [
                rng.choice(idx, size=max(1, round(max_fit_rows * idx.size / n)), replace=False)
                for idx in (np.flatnonzero(y > 0), np.flatnonzero(y < 0))
                if idx.size
            ]
        )
        rows.sort()
    else:
        rows = np.arange(n)
    scale = n / rows.size
    Z = np.empty((rows.size, k))
    for start in range(0, rows.size, chunk_rows):
        part = X[rows[start : start + chunk_rows]]
        Z[start : start + part.shape[0]] = _rbf_kernel(part, landmarks, gamma, l_sq) @ root_inv
    fit = fit_linear_hinge(Z, y[rows], C * scale, s[rows], tol=tol)
    del Z
    return RbfApproximation(
        landmarks=landmarks,
        coef=root_inv @ fit.w,
        intercept=fit.b,
        gamma=float(gamma),
        fit_rows=rows,
        fit=fit,
        chunk_rows=chunk_rows,
    )
