"""The report's figures, drawn from the core's numbers with matplotlib's Agg backend.

Each function returns PNG bytes. A bare ``Figure`` with an Agg canvas is used instead of
pyplot, so drawing touches no global state and works beside a running window, on a
worker thread or on a machine without a display.
"""

from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from reviewer.core.plain import plain

__all__ = ["metrics_png", "slack_histogram_figure", "slack_histogram_png"]

# Colour-blind-safe pair (Okabe & Ito's palette, common practice for charts).
_BEFORE = "#999999"
_AFTER = "#0072B2"
_EXTRA = ("#E69F00", "#009E73", "#CC79A7")
_LINE = "#D55E00"


def _png(fig: Any) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=100, metadata={"Software": None})
    return buffer.getvalue()


def _finite(values: Sequence[float] | np.ndarray | None) -> np.ndarray:
    if values is None:
        return np.empty(0)
    array = np.asarray(values, dtype=float).reshape(-1)
    return array[np.isfinite(array)]


def slack_histogram_png(
    slack: Sequence[float] | np.ndarray,
    *,
    what: str = "held-out slack",
    baseline: Sequence[float] | np.ndarray | None = None,
) -> bytes | None:
    """slack_histogram_figure as PNG bytes; None when there is nothing to draw."""
    fig = slack_histogram_figure(slack, what=what, baseline=baseline)
    return None if fig is None else _png(fig)


def slack_histogram_figure(
    slack: Sequence[float] | np.ndarray,
    *,
    what: str = "held-out slack",
    baseline: Sequence[float] | np.ndarray | None = None,
) -> Any:
    """Histogram of the positive slacks with the slack = 1 line; None when nothing to draw.

    Rows with slack 0 (clear of the margin) are counted in the legend, not drawn: they are
    usually most rows and would flatten every other bar. ``baseline`` (the fit before the
    edits) is drawn as an outline on the same bins.
    """
    from matplotlib.figure import Figure

    now = _finite(slack)
    before = _finite(baseline)
    if now.size == 0:
        return None
    top = float(max(2.0, np.max(now), np.max(before) if before.size else 0.0))
    bins = np.linspace(0.0, top, 41).tolist()
    fig = Figure(figsize=(7.0, 3.2))
    ax = fig.add_subplot()
    positive = now[now > 0]
    ax.hist(
        positive,
        bins=bins,
        color=_AFTER,
        alpha=0.85,
        label=f"{what}, now ({int(np.sum(now == 0)):,} rows at 0 not drawn)",
    )
    if before.size:
        ax.hist(
            before[before > 0],
            bins=bins,
            histtype="step",
            color=_BEFORE,
            linewidth=1.6,
            label=f"before the edits ({int(np.sum(before == 0)):,} rows at 0)",
        )
    ax.axvline(
        1.0, color=_LINE, linestyle="--", linewidth=1.4, label="slack = 1 (wrong side beyond)"
    )
    ax.set_xlabel(what)
    ax.set_ylabel("rows")
    ax.set_xlim(0.0, top)
    ax.legend(loc="upper right", fontsize=8, frameon=False)
    ax.spines[["top", "right"]].set_visible(False)
    fig.tight_layout()
    return fig


def metrics_png(
    groups: Mapping[str, Mapping[str, Sequence[Any]]], columns: Sequence[str]
) -> bytes | None:
    """Grouped bars: one panel per group (title -> metric -> one value per column).

    Metrics whose values are not all numbers are left out; None when nothing is left.
    """
    from matplotlib.figure import Figure

    panels = []
    for title, metrics in groups.items():
        names, values = [], []
        for name, row in metrics.items():
            row = [plain(v) for v in row]
            if len(row) == len(columns) and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in row
            ):
                names.append(name)
                values.append([float(v) for v in row])
        if names:
            panels.append((title, names, np.array(values)))
    if not panels:
        return None
    colours = [_BEFORE, _AFTER, *_EXTRA][: len(columns)]
    height = 0.6 + sum(0.45 * len(names) + 0.6 for _, names, _ in panels)
    fig = Figure(figsize=(7.0, max(2.4, height)))
    axes = fig.subplots(len(panels), 1, squeeze=False)[:, 0]
    for ax, (title, names, table) in zip(axes, panels, strict=True):
        y = np.arange(len(names))
        step = 0.8 / len(columns)
        for j, (column, colour) in enumerate(zip(columns, colours, strict=True)):
            offset = (j - (len(columns) - 1) / 2) * step
            ax.barh(y + offset, table[:, j], height=step, color=colour, label=column)
        ax.set_yticks(y, names)
        ax.invert_yaxis()
        ax.set_title(title, fontsize=10, loc="left")
        if table.min() >= 0.0 and table.max() <= 1.0:
            ax.set_xlim(0.0, 1.0)  # shares and accuracies on their whole scale
        ax.spines[["top", "right"]].set_visible(False)
    # One legend above the panels, so it never covers a bar.
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="upper center", ncol=len(columns), fontsize=8, frameon=False)
    fig.tight_layout(rect=(0.0, 0.0, 1.0, 1.0 - 0.35 / fig.get_figheight()))
    return _png(fig)
