"""The C curve view: cross-validated scores and row counts across C, computed on a worker.

Before it is computed the view shows a few words instead of empty axes; a click on a point
asks for a refit with that C (and gamma).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QLabel,
    QProgressBar,
    QPushButton,
    QStackedWidget,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door
from reviewer.core.door import CURVE_CS, ReviewSession
from reviewer.core.values import FitSettings
from reviewer.gui import palette
from reviewer.gui.bus import ReviewBus
from reviewer.gui.workers import TaskRunner


class CCurvePlot(QWidget):
    """Cross-validated accuracy, bound support vectors and wrong_side rows across C.

    Computed in the background on the current labels and exclusions; click a point to refit
    with that C (and gamma).
    """

    def __init__(
        self, session: ReviewSession, bus: ReviewBus, parent: QWidget | None = None
    ) -> None:
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
        self.progress_bar.hide()
        top = QHBoxLayout()
        for w in (QLabel("Kernel:"), self.kernel_combo, self.run_button, self.cancel_button):
            top.addWidget(w)
        top.addWidget(self.progress_bar, 1)
        top.addStretch(0)

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
        # No empty axes before there is a curve: a few words until it is computed.
        self.placeholder = QLabel(
            "The C curve cross-validates a grid of C on the current labels and shows the "
            "scores and row counts at each C. It takes a while on a large table, so it runs "
            "when you press Compute curve."
        )
        self.placeholder.setObjectName("hint")
        self.placeholder.setWordWrap(True)
        self.placeholder.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.stack = QStackedWidget()
        self.stack.addWidget(self.placeholder)
        self.stack.addWidget(self.layout_widget)
        self.series_label = QLabel("")
        self.series_label.setObjectName("hint")
        self.series_label.setWordWrap(True)
        layout.addLayout(top)
        layout.addWidget(self.stack, 1)
        layout.addWidget(self.series_label)
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
        self.progress_bar.show()
        self.status.setText("Computing the C curve...")
        self.runner.start(door.c_curve_job(s, kernel=self.kernel_combo.currentText(), Cs=self.Cs))

    def _on_progress(self, fraction: float, message: str) -> None:
        self.progress_bar.setValue(int(fraction * 1000))
        self.status.setText(message)

    def _done(self) -> None:
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)
        self.progress_bar.setValue(0)
        self.progress_bar.hide()

    def _on_finished(self, result: dict) -> None:
        self._done()
        self.set_result(result)

    def _on_failed(self, message: str) -> None:
        self._done()
        self.status.setText(f"C curve failed: {message}")

    def _on_cancelled(self) -> None:
        self._done()
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
        self.curves = []
        styles = [Qt.PenStyle.SolidLine, Qt.PenStyle.DashLine, Qt.PenStyle.DotLine]
        self.stack.setCurrentIndex(1 if self.series else 0)
        words = ("solid", "dashed", "dotted")
        self.series_label.setText(
            "Lines: " + "; ".join(f"{words[i % 3]} {s.name}" for i, s in enumerate(self.series))
            if len(self.series) > 1
            else ""
        )
        for gi, s in enumerate(self.series):
            style = styles[gi % len(styles)]
            x = np.log10(s.C)
            for plot, y, color, name, sym in (
                (self.acc_plot, s.accuracy, palette.BLUE, "accuracy", "o"),
                (self.acc_plot, s.balanced_accuracy, palette.ORANGE, "balanced accuracy", "s"),
                (self.count_plot, s.n_bound, palette.GREEN, "bound support vectors", "o"),
                (self.count_plot, s.n_wrong_side, palette.VERMILION, "wrong side rows", "t"),
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
                if gi == 0:  # one entry per measure; line styles are named below the plot
                    legend = self.legends[0 if plot is self.acc_plot else 1]
                    legend.addItem(curve, name)
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
