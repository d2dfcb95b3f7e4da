"""The plot widgets: projection, slack histogram and C curve.

They draw what ``reviewer.core.review.plotdata`` computes and talk to the rest of the window
only through the bus."""

from __future__ import annotations

from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QHBoxLayout,
    QLabel,
    QProgressBar,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door
from reviewer.core.door import CURVE_CS
from reviewer.core.values import REVIEW_NAMES, FitSettings
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.workers import TaskRunner

# One symbol per review decision (pyqtgraph symbol codes), so decisions read without colour.
DECISION_SYMBOLS = {"open": "o", "confirmed": "s", "relabelled": "t", "excluded": "x"}
PLAIN_SIZE = 6
SUSPECT_SIZE = 11
REVIEWED_SIZE = 9


def _white_plot(widget: pg.PlotWidget) -> pg.PlotItem:
    widget.setBackground("w")
    item = widget.getPlotItem()
    for side in ("left", "bottom"):
        axis = item.getAxis(side)
        axis.setPen(palette.pen(palette.TEXT))
        axis.setTextPen(palette.pen(palette.TEXT))
    item.showGrid(x=True, y=True, alpha=0.15)
    return item


class ProjectionPlot(QWidget):
    """Every row (or a documented sample) on the first two principal components.

    Fill colour is the given label, a thick dark outline marks wrong_side rows and a thin one
    inside_margin rows, and the symbol shows the review decision. Click a point to select
    its row; a row selected elsewhere gets a ring.
    """

    def __init__(
        self,
        session: Any,
        bus: ReviewBus,
        parent: QWidget | None = None,
        *,
        limit: int = door.PROJECTION_LIMIT,
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.limit = limit
        self.points: door.ProjectionPoints | None = None
        self.boundary: door.Boundary | None = None
        self.selected_row: int | None = None

        self.plot_widget = pg.PlotWidget()
        self.plot = _white_plot(self.plot_widget)
        # One scatter item per style group (class x zone x decision), each with a single
        # brush, pen, symbol and size: pyqtgraph's fast path. Per-point styles in one item
        # cost ~25 s per million points in setData; a handful of uniform items cost ~1 s.
        self.groups: list[pg.ScatterPlotItem] = []
        self.lines = {
            level: pg.PlotCurveItem(
                connect="pairs",
                pen=pg.mkPen(
                    palette.qcolor(palette.TEXT),
                    width=2 if level == 0 else 1.2,
                    style=Qt.PenStyle.SolidLine if level == 0 else Qt.PenStyle.DashLine,
                ),
            )
            for level in (-1.0, 0.0, 1.0)
        }
        for line in self.lines.values():
            self.plot.addItem(line)
        self.ring = pg.ScatterPlotItem(
            size=22,
            symbol="o",
            brush=None,
            pen=pg.mkPen(palette.qcolor(palette.VERMILION), width=3),
        )
        self.ring.setZValue(10)
        self.plot.addItem(self.ring)
        self.legend = pg.LegendItem(offset=(-10, 10), labelTextColor=palette.TEXT)
        self.legend.setParentItem(self.plot.getViewBox())
        self.legend.setBrush(pg.mkBrush(255, 255, 255, 210))
        self._legend_samples: list[pg.ScatterPlotItem] = []
        self.info = QLabel()
        self.info.setWordWrap(True)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addWidget(self.plot_widget, 1)
        layout.addWidget(self.info)
        bus.row_selected.connect(self.highlight_row)

    # ---- drawing ---------------------------------------------------------------------------
    def refresh(self) -> None:
        s = self.session
        pts = door.session_projection(s, limit=self.limit)
        self.points = pts
        k = len(pts.classes)
        fills = [palette.brush(palette.GREY, 160), *palette.class_brushes(k, 200)]
        outlines = [
            pg.mkPen(255, 255, 255, 160, width=0.6),
            pg.mkPen(palette.qcolor(palette.TEXT, 200), width=1.2),
            pg.mkPen(palette.qcolor(palette.INK), width=2.4),
        ]
        zone_kind = (pts.zone == "inside_margin").astype(np.int64) + 2 * (pts.zone == "wrong_side")
        review = pts.review.astype(np.int64)
        n_rev = len(REVIEW_NAMES)
        key = ((pts.class_code + 1) * 3 + zone_kind) * n_rev + review
        order = np.argsort(key, kind="stable")
        keys, starts = np.unique(key[order], return_index=True)
        bounds = [*starts[1:], len(order)]
        while len(self.groups) < len(keys):
            item = pg.ScatterPlotItem(pxMode=True, hoverable=False)
            item.sigClicked.connect(self._on_clicked)
            self.plot.addItem(item)
            self.groups.append(item)
        for item, k_, a, b in zip(self.groups, keys, starts, bounds, strict=False):
            idx = order[a:b]
            cls, rest = divmod(int(k_), 3 * n_rev)
            zk, rv = divmod(rest, n_rev)
            size = SUSPECT_SIZE if zk else REVIEWED_SIZE if rv else PLAIN_SIZE
            item.setData(
                x=pts.x[idx],
                y=pts.y[idx],
                data=pts.rows[idx],
                brush=fills[cls],
                pen=outlines[zk],
                symbol=DECISION_SYMBOLS[REVIEW_NAMES[rv]],
                size=size,
            )
            # Suspects on top, then reviewed rows, then the rest.
            item.setZValue(2 * zk + (1 if rv else 0))
        for item in self.groups[len(keys) :]:
            item.setData(x=[], y=[])
        self._draw_boundary()
        self._draw_legend(pts.classes)
        var = pts.variance
        self.plot.setLabel("bottom", f"component 1 ({var[0]:.0%} of variance)")
        self.plot.setLabel("left", f"component 2 ({var[1]:.0%} of variance)")
        drawn = (
            f"{len(pts.rows):,} of {pts.n_total:,} rows drawn: every suspect and reviewed row, "
            "and a random sample of the rest."
            if pts.downsampled
            else f"All {pts.n_total:,} rows drawn."
        )
        note = self.boundary.note if self.boundary else ""
        self.info.setText(
            f"{drawn} Fill: given label; thick outline: wrong_side, thin: inside_margin; "
            "symbol: ○ open, □ confirmed, ▽ relabelled, × excluded. " + note
        )
        self.plot_widget.setToolTip(note)
        if self.selected_row is not None:
            self.highlight_row(self.selected_row)

    def _draw_boundary(self) -> None:
        s = self.session
        model = s.latest.model if s.latest is not None else None
        coords, _ = s.projection()
        if s.latest is None:
            self.boundary = door.Boundary(note="Boundary not drawn: no fit yet.")
        else:
            self.boundary = door.boundary_in_projection(model, s.X, coords)
        for level, line in self.lines.items():
            seg = self.boundary.segments.get(level)
            if seg is None or not len(seg):
                line.setData([], [])
            else:
                line.setData(seg[:, [0, 2]].ravel(), seg[:, [1, 3]].ravel())
        # Keep the view on the data: the grid reaches a little beyond it.
        self.plot.enableAutoRange()

    def _draw_legend(self, classes: list[str]) -> None:
        self.legend.clear()
        self._legend_samples = []
        for i, name in enumerate(classes[:8]):
            sample = pg.ScatterPlotItem(
                symbol="o", size=9, brush=palette.brush(palette.class_color(i)), pen=None
            )
            self._legend_samples.append(sample)
            self.legend.addItem(sample, name)
        for name, pen_ in (
            ("wrong_side", pg.mkPen(palette.qcolor(palette.INK), width=2.4)),
            ("inside_margin", pg.mkPen(palette.qcolor(palette.TEXT), width=1.2)),
        ):
            sample = pg.ScatterPlotItem(symbol="o", size=10, brush=pg.mkBrush("w"), pen=pen_)
            self._legend_samples.append(sample)
            self.legend.addItem(sample, name)
        for name in REVIEW_NAMES[1:]:
            sample = pg.ScatterPlotItem(
                symbol=DECISION_SYMBOLS[name], size=9, brush=palette.brush(palette.GREY), pen=None
            )
            self._legend_samples.append(sample)
            self.legend.addItem(sample, name)

    def drawn_points(self) -> dict[str, np.ndarray]:
        """Every drawn point across the style groups: x, y, row, size and symbol."""
        parts: dict[str, list[np.ndarray]] = {k: [] for k in ("x", "y", "row", "size", "symbol")}
        for item in self.groups:
            d = item.data
            parts["x"].append(d["x"])
            parts["y"].append(d["y"])
            parts["row"].append(d["data"].astype(np.int64))
            # A group's style is set once on the item, so its per-point fields stay empty.
            parts["size"].append(np.full(len(d), float(item.opts["size"])))
            parts["symbol"].append(np.full(len(d), item.opts["symbol"], dtype=object))
        return {k: np.concatenate(v) if v else np.empty(0) for k, v in parts.items()}

    # ---- selection -------------------------------------------------------------------------
    def _on_clicked(self, _item: Any, points: Any, _ev: Any = None) -> None:
        if points is None or len(points) == 0:
            return
        # Overlapping points: the last drawn (top-most, suspects) is the one a reviewer sees.
        row = int(points[-1].data())
        self.bus.row_selected.emit(row)

    def highlight_row(self, row: int) -> None:
        """Ring the row's point (drawn even when the row was left out of the sample)."""
        self.selected_row = int(row)
        coords, _ = self.session.projection()
        if not 0 <= row < len(coords):
            self.ring.setData([], [])
            return
        self.ring.setData([float(coords[row, 0])], [float(coords[row, 1])])

    def point_position(self, row: int) -> tuple[float, float]:
        coords, _ = self.session.projection()
        return float(coords[row, 0]), float(coords[row, 1])


class SlackHistogramPlot(QWidget):
    """Slack of every row (or one class), training or held-out, with the 0 and 1 lines.

    Drag the threshold line to narrow the triage list to rows with slack above it.
    """

    def __init__(self, session: Any, bus: ReviewBus, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.histogram: door.Histogram | None = None
        self.last_mask: np.ndarray | None = None

        self.class_combo = QComboBox()
        self.class_combo.setToolTip("Show every row or the rows of one given class")
        self.source_combo = QComboBox()
        self.source_combo.addItem("training slack", "slack")
        self.source_combo.addItem("held-out slack", "heldout_slack")
        self.source_combo.setToolTip(
            "Held-out slack comes from a model that did not see the row (cross-fitting)"
        )
        self.zero_box = QCheckBox("include slack = 0")
        self.zero_box.setToolTip("Rows with slack 0 are clear of the margin; their bar is tall")
        self.clear_button = QPushButton("Clear filter")
        self.clear_button.setToolTip("Show every row in the triage list again")
        top = QHBoxLayout()
        for w in (
            QLabel("Rows:"),
            self.class_combo,
            QLabel("Slack:"),
            self.source_combo,
            self.zero_box,
        ):
            top.addWidget(w)
        top.addStretch(1)
        top.addWidget(self.clear_button)

        self.plot_widget = pg.PlotWidget()
        self.plot = _white_plot(self.plot_widget)
        self.plot.setLabel("bottom", "slack ξ")
        self.plot.setLabel("left", "rows")
        self.bars = pg.BarGraphItem(
            x0=[], x1=[], height=[], brush=palette.brush(palette.BLUE, 170), pen=pg.mkPen("w")
        )
        self.plot.addItem(self.bars)
        for pos, text in ((0.0, "ξ = 0"), (1.0, "ξ = 1: wrong side beyond")):
            line = pg.InfiniteLine(
                pos=pos,
                angle=90,
                movable=False,
                pen=pg.mkPen(palette.qcolor(palette.TEXT), width=1.5, style=Qt.PenStyle.DashLine),
                label=text,
                labelOpts={"position": 0.92, "color": palette.TEXT, "anchors": [(0, 0), (0, 0)]},
            )
            self.plot.addItem(line)
        self.threshold = pg.InfiniteLine(
            pos=1.0,
            angle=90,
            movable=True,
            pen=pg.mkPen(palette.qcolor(palette.VERMILION), width=2.5),
            hoverPen=pg.mkPen(palette.qcolor(palette.VERMILION), width=4),
            label="filter: ξ > {value:.2f}",
            labelOpts={"position": 0.75, "color": palette.VERMILION, "movable": True},
        )
        self.threshold.setToolTip("Drag to show only rows with slack above this line")
        self.threshold.sigPositionChangeFinished.connect(self._on_threshold)
        self.plot.addItem(self.threshold)
        self.info = QLabel()
        self.info.setWordWrap(True)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(top)
        layout.addWidget(self.plot_widget, 1)
        layout.addWidget(self.info)
        self.class_combo.currentIndexChanged.connect(self._draw)
        self.source_combo.currentIndexChanged.connect(self._draw)
        self.zero_box.toggled.connect(self._draw)
        self.clear_button.clicked.connect(self.clear_filter)

    def refresh(self) -> None:
        current = self.class_combo.currentData()
        self.class_combo.blockSignals(True)
        self.class_combo.clear()
        self.class_combo.addItem("all rows", None)
        for name in self.session.classes:
            self.class_combo.addItem(f"given label {name}", name)
        i = self.class_combo.findData(current)
        self.class_combo.setCurrentIndex(max(i, 0))
        self.class_combo.blockSignals(False)
        self._draw()

    def slack_values(self) -> np.ndarray:
        """The slack column shown (all table rows), NaN without a fit."""
        latest = self.session.latest
        if latest is None:
            return np.full(self.session.n_rows, np.nan)
        return latest.rows[self.source_combo.currentData()].to_numpy(dtype=float)

    def class_mask(self) -> np.ndarray | None:
        name = self.class_combo.currentData()
        if name is None:
            return None
        return np.array([v is not None and str(v) == name for v in self.session.labels])

    def _draw(self) -> None:
        slack = self.slack_values()
        h = door.slack_histogram(slack, self.class_mask(), skip_zero=not self.zero_box.isChecked())
        self.histogram = h
        self.bars.setOpts(x0=h.edges[:-1], x1=h.edges[1:], height=h.counts)
        self.plot.setXRange(0.0, float(h.edges[-1]), padding=0.02)
        self.plot.setYRange(
            0.0, max(1.0, float(h.counts.max()) if len(h.counts) else 1.0) * 1.08, padding=0
        )
        parts = []
        if not self.zero_box.isChecked():
            parts.append(f"{h.n_zero:,} rows with slack 0 (clear) not drawn.")
        if h.n_missing:
            parts.append(f"{h.n_missing:,} rows without this slack (unlabelled or not scored).")
        parts.append(
            "ξ > 1: on the wrong side of the boundary; 0 < ξ ≤ 1: inside the margin. "
            "Drag the red line to filter the triage list."
        )
        self.info.setText(" ".join(parts))

    def filter_mask(self, threshold: float) -> np.ndarray:
        """Rows above ``threshold`` in the shown slack, within the chosen class."""
        mask = door.slack_above(self.slack_values(), threshold)
        cls = self.class_mask()
        return mask if cls is None else mask & cls

    def _on_threshold(self, *_: Any) -> None:
        mask = self.filter_mask(float(self.threshold.value()))
        self.last_mask = mask
        self.bus.rows_filter.emit(mask)

    def clear_filter(self) -> None:
        self.last_mask = None
        self.bus.rows_filter.emit(None)


class CCurvePlot(QWidget):
    """Cross-validated accuracy, bound support vectors and wrong_side rows across C.

    Computed in the background on the current labels and exclusions; click a point to refit
    with that C (and gamma).
    """

    def __init__(self, session: Any, bus: ReviewBus, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.result: dict | None = None
        self.Cs: tuple[float, ...] = CURVE_CS  # the grid of C to sweep
        self.series: list[door.CurveSeries] = []
        self.curves: list[tuple[door.CurveSeries, str, pg.PlotDataItem]] = []
        self.runner = TaskRunner(self)
        self.runner.progress.connect(self._on_progress)
        self.runner.finished.connect(self._on_finished)
        self.runner.failed.connect(self._on_failed)
        self.runner.cancelled.connect(self._on_cancelled)

        self.kernel_combo = QComboBox()
        self.kernel_combo.addItems(["linear", "rbf", "poly"])
        self.run_button = QPushButton("Compute curve")
        self.run_button.setToolTip("Cross-validate a log grid of C on the current labels")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.progress_bar = QProgressBar()
        self.progress_bar.setRange(0, 1000)
        self.progress_bar.setTextVisible(False)
        self.status = QLabel("Not computed yet.")
        self.status.setWordWrap(True)
        top = QHBoxLayout()
        for w in (QLabel("Kernel:"), self.kernel_combo, self.run_button, self.cancel_button):
            top.addWidget(w)
        top.addWidget(self.progress_bar, 1)

        self.layout_widget = pg.GraphicsLayoutWidget()
        self.layout_widget.setBackground("w")
        self.acc_plot = self.layout_widget.addPlot(row=0, col=0)
        self.count_plot = self.layout_widget.addPlot(row=1, col=0)
        self.count_plot.setXLink(self.acc_plot)
        for p, ylabel in ((self.acc_plot, "cross-validated score"), (self.count_plot, "rows")):
            for side in ("left", "bottom"):
                p.getAxis(side).setPen(palette.pen(palette.TEXT))
                p.getAxis(side).setTextPen(palette.pen(palette.TEXT))
            p.showGrid(x=True, y=True, alpha=0.15)
            p.setLabel("left", ylabel)
            p.setLabel("bottom", "log10 C")
            p.getAxis("left").enableAutoSIPrefix(False)
        # Legends in a column of their own, so they never cover the curves.
        self.legends = []
        for row in (0, 1):
            legend = pg.LegendItem(labelTextColor=palette.TEXT)
            self.layout_widget.addItem(legend, row=row, col=1)
            self.legends.append(legend)
        self.chosen_lines: list[pg.InfiniteLine] = []
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addLayout(top)
        layout.addWidget(self.layout_widget, 1)
        layout.addWidget(self.status)
        self.run_button.clicked.connect(self.start)
        self.cancel_button.clicked.connect(self.runner.cancel)

    # ---- background work -------------------------------------------------------------------
    def refresh(self) -> None:
        latest = self.session.latest
        kernel = latest.settings.kernel if latest is not None else self.session.settings.kernel
        if kernel in ("linear", "rbf", "poly") and not self.runner.is_running:
            self.kernel_combo.setCurrentText(kernel)
        self._draw()

    def start(self) -> None:
        if self.runner.is_running:
            return
        s = self.session
        self.run_button.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.progress_bar.setValue(0)
        self.status.setText("Computing the C curve...")
        self.runner.start(door.c_curve_job(s, kernel=self.kernel_combo.currentText(), Cs=self.Cs))

    def _on_progress(self, fraction: float, message: str) -> None:
        self.progress_bar.setValue(int(fraction * 1000))
        self.status.setText(message)

    def _done(self) -> None:
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)

    def _on_finished(self, result: dict) -> None:
        self._done()
        self.set_result(result)

    def _on_failed(self, message: str) -> None:
        self._done()
        self.status.setText(f"C curve failed: {message}")

    def _on_cancelled(self) -> None:
        self._done()
        self.progress_bar.setValue(0)
        self.status.setText("C curve cancelled; the previous curve is unchanged.")

    def set_result(self, result: dict) -> None:
        """Show a finished C curve job's result."""
        self.result = result
        self.series = door.curve_series(result["candidates"])
        self._draw()
        note = (
            f"Cross-validated with {result['folds']} folds on {result['n_rows']:,} rows"
            + (" (a stratified sample)" if result["sampled"] else "")
            + ". Click a point to refit with that C."
        )
        self.status.setText(note)

    # ---- drawing ---------------------------------------------------------------------------
    def _draw(self) -> None:
        for p, legend in zip((self.acc_plot, self.count_plot), self.legends, strict=True):
            p.clear()
            legend.clear()
        self.chosen_lines = []
        self.curves: list[tuple[door.CurveSeries, str, pg.PlotDataItem]] = []
        styles = [Qt.PenStyle.SolidLine, Qt.PenStyle.DashLine, Qt.PenStyle.DotLine]
        for gi, s in enumerate(self.series):
            style = styles[gi % len(styles)]
            x = np.log10(s.C)
            suffix = "" if len(self.series) == 1 else f" ({s.name.split(', ', 1)[-1]})"
            for plot, y, color, name, sym in (
                (self.acc_plot, s.accuracy, palette.BLUE, "accuracy", "o"),
                (self.acc_plot, s.balanced_accuracy, palette.ORANGE, "balanced accuracy", "s"),
                (self.count_plot, s.n_bound, palette.GREEN, "bound support vectors", "o"),
                (self.count_plot, s.n_wrong_side, palette.VERMILION, "wrong_side rows", "t"),
            ):
                curve = pg.PlotDataItem(
                    x,
                    y,
                    pen=pg.mkPen(palette.qcolor(color), width=2, style=style),
                    symbol=sym,
                    symbolSize=8,
                    symbolBrush=palette.brush(color),
                    symbolPen=None,
                )
                curve.sigPointsClicked.connect(
                    lambda _item, points, _ev=None, series=s: self._on_point(series, points)
                )
                plot.addItem(curve)
                self.curves.append((s, name, curve))
                legend = self.legends[0 if plot is self.acc_plot else 1]
                legend.addItem(curve, name + suffix)
        latest = self.session.latest
        chosen = latest.settings.C if latest is not None else None
        if chosen:
            for plot in (self.acc_plot, self.count_plot):
                line = pg.InfiniteLine(
                    pos=float(np.log10(float(chosen))),
                    angle=90,
                    movable=False,
                    pen=pg.mkPen(
                        palette.qcolor(palette.TEXT), width=1.5, style=Qt.PenStyle.DashDotLine
                    ),
                    label=f"chosen C = {float(chosen):g}" if plot is self.acc_plot else None,
                    labelOpts={"position": 0.1, "color": palette.TEXT},
                )
                plot.addItem(line)
                self.chosen_lines.append(line)

    def _on_point(self, series: door.CurveSeries, points: Any) -> None:
        if points is None or len(points) == 0:
            return
        x = float(points[0].pos().x())
        i = int(np.argmin(np.abs(np.log10(series.C) - x)))
        self.pick(series, i)

    def pick(self, series: door.CurveSeries, index: int) -> FitSettings:
        """Ask for a refit with the C (and gamma) of one point of the curve."""
        base = self.session.settings.to_dict()
        base["kernel"] = (self.result or {}).get("kernel") or self.kernel_combo.currentText()
        base["C"] = float(series.C[index])
        if series.gamma is not None and base["kernel"] != "linear":
            base["gamma"] = float(series.gamma)
        settings = FitSettings.from_dict(base).validate()
        self.bus.refit_requested.emit(settings)
        return settings

    def shutdown(self) -> None:
        self.runner.shutdown()
