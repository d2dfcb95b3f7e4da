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
    QGridLayout,
    QLabel,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door
from reviewer.core.door import ReviewSession
from reviewer.core.values import REVIEW_NAMES, display_name
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.widgets import ElidedLabel

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
        session: ReviewSession,
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
        # Component scores are plain numbers: no "(x0.001)" unit prefix beside the axis name
        # (TF-IDF rows give scores of order 1e-3).
        for side in ("left", "bottom"):
            self.plot.getAxis(side).enableAutoSIPrefix(False)
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
        # The legend sits under the plot, never over the points.
        self.legend = QLabel()
        self.legend.setObjectName("projection_legend")
        self.legend.setWordWrap(True)
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.info = QLabel()
        self.info.setWordWrap(True)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(2, 2, 2, 2)
        layout.addWidget(self.plot_widget, 1)
        layout.addWidget(self.legend)
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
            f"{len(pts.rows):,} of {pts.n_total:,} rows drawn: every reviewed row, the most "
            "suspect rows, and a random sample of the rest."
            if pts.downsampled
            else f"All {pts.n_total:,} rows drawn."
        )
        note = self.boundary.note if self.boundary else ""
        self.info.setText(f"{drawn} Fill: the current label. " + note)
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
        parts = [
            f"<span style='color:{palette.class_color(i).name()}'>●</span>&nbsp;{name}"
            for i, name in enumerate(classes[:8])
        ]
        if len(classes) > 8:
            parts.append(f"… {len(classes) - 8} more")
        parts.append(f"<b>◯</b>&nbsp;thick ring: {display_name('wrong_side')}")
        parts.append(f"○&nbsp;thin ring: {display_name('inside_margin')}")
        parts.append("□ confirmed &nbsp;▽ relabelled &nbsp;× excluded")
        self.legend.setText(" &nbsp;·&nbsp; ".join(parts))

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

    def __init__(
        self, session: ReviewSession, bus: ReviewBus, parent: QWidget | None = None
    ) -> None:
        super().__init__(parent)
        self.session = session
        self.bus = bus
        self.histogram: door.Histogram | None = None
        self.last_mask: np.ndarray | None = None

        self.class_combo = QComboBox()
        self.class_combo.setToolTip("Show every row or the rows of one given class")
        self.source_combo = QComboBox()
        self.source_combo.addItem("held-out slack", "heldout_slack")
        self.source_combo.addItem("training slack", "slack")
        self._source_chosen = False
        self.source_combo.setToolTip(
            "Held-out slack comes from a model that did not see the row (cross-fitting)"
        )
        self.zero_box = QCheckBox("include slack = 0")
        self.zero_box.setToolTip("Rows with slack 0 are clear of the margin; their bar is tall")
        self.clear_button = QPushButton("Clear filter")
        self.clear_button.setToolTip("Show every row in the triage list again")
        for combo in (self.class_combo, self.source_combo):
            combo.setSizeAdjustPolicy(
                QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon
            )
            combo.setMinimumContentsLength(10)
        self.ranking_label = ElidedLabel("")
        self.ranking_label.setObjectName("hint")
        top = QGridLayout()
        top.addWidget(QLabel("Rows:"), 0, 0)
        top.addWidget(self.class_combo, 0, 1)
        top.addWidget(QLabel("Slack:"), 0, 2)
        top.addWidget(self.source_combo, 0, 3)
        top.addWidget(self.zero_box, 1, 0, 1, 2)
        top.addWidget(self.clear_button, 1, 3)
        top.addWidget(self.ranking_label, 2, 0, 1, 4)
        top.setColumnStretch(1, 1)
        top.setColumnStretch(3, 1)

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
            label="drag to filter",
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
        self.source_combo.currentIndexChanged.connect(self._on_source)
        self.source_combo.activated.connect(self._choose_source)
        self.zero_box.toggled.connect(self._draw)
        self.clear_button.clicked.connect(self.clear_filter)

    def _choose_source(self, _index: int) -> None:
        self._source_chosen = True  # the reviewer picked one: keep it across fits

    def _on_source(self, _index: int) -> None:
        if self.last_mask is not None:
            self.clear_filter()
        self._draw()

    def ranked_by(self) -> str:
        """The slack column the ranking uses: held-out unless the settings say training."""
        s = self.session
        score = s.latest.settings.score if s.latest is not None else s.settings.score
        if score == "heldout" and s.latest is not None:
            if not np.isfinite(s.latest.rows["heldout_slack"].to_numpy(dtype=float)).any():
                return "slack"  # folds = 0: no held-out values, the ranking falls back
        return "heldout_slack" if score == "heldout" else "slack"

    def refresh(self) -> None:
        current = self.class_combo.currentData()
        self.class_combo.blockSignals(True)
        self.class_combo.clear()
        self.class_combo.addItem("all rows", None)
        for name in self.session.classes:
            self.class_combo.addItem(f"label {name}", name)
        i = self.class_combo.findData(current)
        self.class_combo.setCurrentIndex(max(i, 0))
        self.class_combo.blockSignals(False)
        ranked = self.ranked_by()
        if not self._source_chosen:
            self.source_combo.blockSignals(True)
            self.source_combo.setCurrentIndex(max(0, self.source_combo.findData(ranked)))
            self.source_combo.blockSignals(False)
        self.ranking_label.setText(
            "The ranking uses "
            + ("held-out slack." if ranked == "heldout_slack" else "training slack.")
        )
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
            "Drag the red line to show only rows above it in the list."
        )
        self.info.setText(" ".join(parts))

    def filter_mask(self, threshold: float) -> np.ndarray:
        """Rows above ``threshold`` in the shown slack, within the chosen class."""
        mask = door.slack_above(self.slack_values(), threshold)
        cls = self.class_mask()
        return mask if cls is None else mask & cls

    def source_name(self) -> str:
        return "held-out ξ" if self.source_combo.currentData() == "heldout_slack" else "ξ"

    def _on_threshold(self, *_: Any) -> None:
        value = float(self.threshold.value())
        mask = self.filter_mask(value)
        self.last_mask = mask
        self.bus.rows_filter.emit(mask)
        # The line says what the list shows now: this filter, with its row count.
        self.threshold.label.setFormat(
            f"list: {self.source_name()} > {value:.2f} ({int(mask.sum()):,} rows)"
        )

    def clear_filter(self) -> None:
        self.last_mask = None
        self.bus.rows_filter.emit(None)
        self.threshold.label.setFormat("drag to filter")
