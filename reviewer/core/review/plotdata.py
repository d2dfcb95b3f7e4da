"""The numbers each plot of the window shows, computed without Qt.

The views in ``reviewer/gui`` only draw what these functions return, so every count, bin and
line on screen can be checked in a plain test.

Downsampling (projection view): a scatter of a million points is slow to redraw, so at most
``PROJECTION_LIMIT`` points are drawn. Every suspect row (wrong_side or inside_margin) and
every reviewed row is always drawn; the rest of the budget goes to a uniform random sample
(fixed seed, so the picture does not flicker between refreshes) of the other rows. When the
kept rows alone exceed the budget, all of them are drawn and nothing else.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from reviewer.core.values import OPEN, REVIEW_NAMES

SUSPECT_ZONES = ("wrong_side", "inside_margin")
# pyqtgraph redraws ~100k points in ~0.15 s and 1M in ~1.5 s; 150k keeps a refresh short.
PROJECTION_LIMIT = 150_000
BOUNDARY_GRID = 160
HISTOGRAM_BINS = 40


# ---- projection ------------------------------------------------------------------------------
def downsample_rows(keep: np.ndarray, limit: int, seed: int = 0) -> np.ndarray:
    """Sorted row positions to draw: every row where ``keep`` is True, then a uniform random
    sample of the others up to ``limit`` rows in all (never fewer than the kept rows)."""
    keep = np.asarray(keep, dtype=bool)
    n = len(keep)
    if n <= limit:
        return np.arange(n)
    must = np.flatnonzero(keep)
    room = limit - len(must)
    if room <= 0:
        return must
    others = np.flatnonzero(~keep)
    rng = np.random.default_rng(seed)
    extra = rng.choice(others, size=min(room, len(others)), replace=False)
    return np.sort(np.concatenate([must, extra]))


@dataclass
class ProjectionPoints:
    """The points the projection view draws, in draw order (suspects last, so on top)."""

    rows: np.ndarray  # table row of each point
    x: np.ndarray
    y: np.ndarray
    class_code: np.ndarray  # index into ``classes``; -1 for an unlabelled row
    classes: list[str]
    zone: np.ndarray  # object array: wrong_side / inside_margin / clear / ""
    review: np.ndarray  # review code per point (values.REVIEW_NAMES)
    suspect: np.ndarray  # bool: wrong_side or inside_margin
    variance: np.ndarray  # share of variance of each axis
    n_total: int  # rows in the table (points drawn may be fewer)

    @property
    def downsampled(self) -> bool:
        return len(self.rows) < self.n_total


def projection_points(
    coords: np.ndarray,
    variance: np.ndarray,
    labels: np.ndarray,
    zones: np.ndarray | None,
    review: np.ndarray,
    *,
    limit: int = PROJECTION_LIMIT,
    seed: int = 0,
) -> ProjectionPoints:
    """Points of the 2-D projection: coordinates, class codes, zones and review states."""
    n = len(coords)
    labels = np.asarray(labels, dtype=object)
    zones = np.full(n, "", dtype=object) if zones is None else np.asarray(zones, dtype=object)
    review = np.asarray(review)
    suspect = np.isin(zones, SUSPECT_ZONES)
    reviewed = review != OPEN
    rows = downsample_rows(suspect | reviewed, limit, seed)
    # Draw order: plain rows first, then reviewed, then suspects, so the marks stay visible.
    weight = suspect[rows].astype(np.int8) * 2 + reviewed[rows].astype(np.int8)
    rows = rows[np.argsort(weight, kind="stable")]
    present = pd.Series(labels)
    present = present[present.notna()]
    classes = sorted({str(v) for v in pd.unique(present)})
    code = pd.Categorical(
        pd.Series(labels[rows]).map(lambda v: None if v is None else str(v)), categories=classes
    ).codes
    return ProjectionPoints(
        rows=rows,
        x=np.asarray(coords[rows, 0], dtype=float),
        y=np.asarray(coords[rows, 1], dtype=float),
        class_code=code.astype(np.int64),
        classes=classes,
        zone=zones[rows],
        review=review[rows],
        suspect=suspect[rows],
        variance=np.asarray(variance, dtype=float),
        n_total=n,
    )


def session_projection(session: Any, *, limit: int = PROJECTION_LIMIT) -> ProjectionPoints:
    """``projection_points`` for a ReviewSession (latest fit's zones, if any)."""
    coords, variance = session.projection()
    zones = session.latest.rows["zone"].to_numpy() if session.latest is not None else None
    return projection_points(coords, variance, session.labels, zones, session.review, limit=limit)


# ---- boundary in the projection ------------------------------------------------------------
@dataclass
class Boundary:
    """Line segments of f = -1, 0, +1 in projection coordinates, or why there are none."""

    segments: dict[float, np.ndarray] = field(default_factory=dict)  # level -> (m, 4) x0 y0 x1 y1
    exact: bool = False
    note: str = ""

    @property
    def drawn(self) -> bool:
        return bool(self.segments)


def contour_segments(
    xs: np.ndarray, ys: np.ndarray, values: np.ndarray, level: float
) -> np.ndarray:
    """Marching squares: (m, 4) segments where ``values`` (shape (len(ys), len(xs))) crosses
    ``level``, linearly interpolated along cell edges. A saddle cell gets two segments."""
    s = np.asarray(values, dtype=float) - level
    a, b = s[:-1, :-1], s[:-1, 1:]  # corners (y0,x0), (y0,x1)
    d, c = s[1:, :-1], s[1:, 1:]  # corners (y1,x0), (y1,x1)
    shape = a.shape
    x0 = np.broadcast_to(np.asarray(xs[:-1], dtype=float)[None, :], shape)
    x1 = np.broadcast_to(np.asarray(xs[1:], dtype=float)[None, :], shape)
    y0 = np.broadcast_to(np.asarray(ys[:-1], dtype=float)[:, None], shape)
    y1 = np.broadcast_to(np.asarray(ys[1:], dtype=float)[:, None], shape)

    def cut(u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        hit = (u > 0) != (v > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(hit, u / (u - v), 0.0)
        return hit, np.clip(np.nan_to_num(t), 0.0, 1.0)

    # Edges in order around the cell: bottom, right, top, left.
    hits, px, py = [], [], []
    for (u, v), (cx, cy) in (
        ((a, b), (lambda t: x0 + t * (x1 - x0), lambda t: y0)),
        ((b, c), (lambda t: x1, lambda t: y0 + t * (y1 - y0))),
        ((d, c), (lambda t: x0 + t * (x1 - x0), lambda t: y1)),
        ((a, d), (lambda t: x0, lambda t: y0 + t * (y1 - y0))),
    ):
        h, t = cut(u, v)
        hits.append(h)
        px.append(np.broadcast_to(cx(t), t.shape))
        py.append(np.broadcast_to(cy(t), t.shape))
    H = np.stack(hits, -1).reshape(-1, 4)
    PX = np.stack(px, -1).reshape(-1, 4)
    PY = np.stack(py, -1).reshape(-1, 4)
    count = H.sum(axis=1)
    out = []
    for want in (2, 4):
        cells = np.flatnonzero(count == want)
        if not len(cells):
            continue
        # Positions of the crossed edges, in edge order (stable sort puts True first).
        order = np.argsort(~H[cells], axis=1, kind="stable")[:, :want]
        ex = np.take_along_axis(PX[cells], order, axis=1)
        ey = np.take_along_axis(PY[cells], order, axis=1)
        for k in range(0, want, 2):
            out.append(np.column_stack([ex[:, k], ey[:, k], ex[:, k + 1], ey[:, k + 1]]))
    return np.concatenate(out) if out else np.empty((0, 4))


def boundary_in_projection(
    model: Any, X: np.ndarray | sp.spmatrix, coords: np.ndarray, *, grid: int = BOUNDARY_GRID
) -> Boundary:
    """f = 0 and f = +-1 of a two-class fit, drawn in the projection plane.

    The grid of projection points is mapped back to feature space by the affine map that
    best reproduces X from its projection (least squares). With at most two features that
    map is exact, so the lines are exact; for a linear model with more features the lines
    are the boundary within the projection plane through the data's centre, so points off
    that plane may sit on the other side. Other cases are not drawn, with a note saying why.

    Sparse X (text features): for the linear kernel f on the plane is the least-squares fit
    of f(x_i) = w.x_i + b on the projection, the same line as the dense route (A w, with A
    the affine map) but without a grid x d block; other kernels are not drawn.
    """
    if model is None:
        return Boundary(
            note="Boundary not drawn: this fit was loaded from the session file; refit to draw it."
        )
    if len(model.classes_) != 2:
        return Boundary(note="Boundary not drawn: it is drawn for two-class fits only.")
    p = X.shape[1]
    if p > 2 and model.kernel != "linear":
        return Boundary(
            note=f"Boundary not drawn: the projection flattens {p} features, so a "
            f"{model.kernel} boundary has no exact place in it."
        )
    if sp.issparse(X) and p <= 2:
        X = sp.csr_matrix(X).toarray()  # at most two columns: tiny
    n = X.shape[0]
    rng = np.random.default_rng(0)
    sample = np.arange(n) if n <= 5000 else rng.choice(n, 5000, replace=False)
    Z1 = np.column_stack([coords[sample], np.ones(len(sample))])
    lo, hi = coords.min(axis=0), coords.max(axis=0)
    pad = 0.05 * np.maximum(hi - lo, 1e-9)
    xs = np.linspace(lo[0] - pad[0], hi[0] + pad[0], grid)
    ys = np.linspace(lo[1] - pad[1], hi[1] + pad[1], grid)
    gx, gy = np.meshgrid(xs, ys)
    if sp.issparse(X):
        problem = model.problems_[0]
        if problem.w is None:
            return Boundary(note="Boundary not drawn: it is drawn for the linear kernel only.")
        wx = np.asarray(X[sample] @ problem.w).ravel()
        Aw, *_ = np.linalg.lstsq(Z1, wx, rcond=None)
        G3 = np.column_stack([gx.ravel(), gy.ravel(), np.ones(gx.size)])
        f = (G3 @ Aw + problem.intercept).reshape(gx.shape)
    else:
        A, *_ = np.linalg.lstsq(Z1, X[sample], rcond=None)
        G = np.column_stack([gx.ravel(), gy.ravel(), np.ones(gx.size)]) @ A
        f = model.problems_[0].decision_function(G).reshape(gx.shape)
    segments = {lv: contour_segments(xs, ys, f, lv) for lv in (-1.0, 0.0, 1.0)}
    exact = p <= 2
    pos = str(model.classes_[1])
    note = (
        f"f = 0 (solid) and f = ±1 (dashed); f > 0 is {pos!r}."
        if exact
        else f"Linear boundary within the projection plane through the data's centre "
        f"(f > 0 is {pos!r}); with {p} features, points off that plane may sit on the "
        "other side of the true boundary."
    )
    return Boundary(segments=segments, exact=exact, note=note)


# ---- slack histogram ---------------------------------------------------------------------------
@dataclass
class Histogram:
    edges: np.ndarray  # bins + 1 edges
    counts: np.ndarray  # rows per bin
    n_zero: int  # rows with slack exactly 0 (left out of the bars when ``skip_zero``)
    n_missing: int  # rows without a slack (unlabelled, or no held-out value)


def slack_histogram(
    slack: np.ndarray,
    mask: np.ndarray | None = None,
    *,
    bins: int = HISTOGRAM_BINS,
    upper: float | None = None,
    skip_zero: bool = True,
) -> Histogram:
    """Counts of slack in ``bins`` equal bins over [0, upper] (default: max(2, largest slack),
    so every row falls in a bin and the 0 and 1 lines sit inside the plot).

    Most rows of a good fit have slack exactly 0; their spike hides the rows that matter,
    so by default they are counted in ``n_zero`` and not binned.
    """
    s = np.asarray(slack, dtype=float)
    if mask is not None:
        s = s[np.asarray(mask, dtype=bool)]
    finite = np.isfinite(s)
    n_missing = int((~finite).sum())
    s = s[finite]
    n_zero = int(np.sum(s <= 0.0))
    if upper is None:
        upper = max(2.0, float(s.max()) if len(s) else 0.0)
    edges = np.linspace(0.0, float(upper), bins + 1)
    values = s[s > 0.0] if skip_zero else s
    counts, _ = np.histogram(values, bins=edges)
    return Histogram(edges=edges, counts=counts, n_zero=n_zero, n_missing=n_missing)


def slack_above(slack: np.ndarray, threshold: float) -> np.ndarray:
    """Rows whose slack is above ``threshold`` (rows without a slack are not)."""
    s = np.asarray(slack, dtype=float)
    return np.isfinite(s) & (s > threshold)


# ---- C curve -----------------------------------------------------------------------------------
@dataclass
class CurveSeries:
    """One curve of the C plot: a fixed gamma (or the linear kernel) across C."""

    name: str
    gamma: float | None
    C: np.ndarray
    accuracy: np.ndarray
    balanced_accuracy: np.ndarray
    n_bound: np.ndarray
    n_wrong_side: np.ndarray


def curve_series(candidates: list[Any]) -> list[CurveSeries]:
    """Group C-curve candidates (autotune.Candidate) by gamma, each sorted by C."""
    groups: dict[float | None, list[Any]] = {}
    for c in candidates:
        groups.setdefault(c.gamma, []).append(c)
    out = []
    for gamma, items in groups.items():
        items = sorted(items, key=lambda c: c.C)
        kernel = items[0].kernel
        name = kernel if gamma is None else f"{kernel}, gamma={gamma:.3g}"
        out.append(
            CurveSeries(
                name=name,
                gamma=gamma,
                C=np.array([c.C for c in items]),
                accuracy=np.array([c.accuracy for c in items]),
                balanced_accuracy=np.array([c.balanced_accuracy for c in items]),
                n_bound=np.array([c.n_bound for c in items]),
                n_wrong_side=np.array([c.n_wrong_side for c in items]),
            )
        )
    return out


# ---- before and after --------------------------------------------------------------------------
def metrics_table(metrics: dict[str, tuple[Any, Any]]) -> pd.DataFrame:
    """One line per metric: before, after and change (after - before where both are numbers)."""
    lines = []
    for name, (before, after) in metrics.items():
        change = None
        if _is_number(before) and _is_number(after):
            change = float(after) - float(before)
        lines.append({"metric": name, "before": before, "after": after, "change": change})
    return pd.DataFrame(lines, columns=["metric", "before", "after", "change"])


def _is_number(v: Any) -> bool:
    return (
        isinstance(v, (int, float, np.integer, np.floating))
        and not isinstance(v, bool)
        and (np.isfinite(float(v)))
    )


def review_name(code: int) -> str:
    return REVIEW_NAMES[int(code)]
