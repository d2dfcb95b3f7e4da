"""The plot views draw what core computed and talk to the window through the bus."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QPointF, Qt
from PySide6.QtTest import QTest

from reviewer.core.output.export import write_summary_html
from reviewer.core.review import plotdata
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings
from reviewer.demo_data import COFFEE_DEMO_ROLES
from reviewer.gui.bus import ReviewBus
from reviewer.gui.views import ViewsPanel, _fmt, render_views_png

DEMO = "reviewer/demo_data/coffee_lots.csv"


@pytest.fixture(scope="module")
def session(tmp_path_factory):
    folder = tmp_path_factory.mktemp("views")
    pd.read_csv(DEMO).head(300).to_csv(folder / "lots.csv", index=False)
    # As the window's coffee demo opens it: the tasting note is read, not fitted.
    s = ReviewSession.open(
        folder / "lots.csv", label="grade", id_column="lot_id", overrides=COFFEE_DEMO_ROLES
    )
    s.fit(FitSettings(kernel="rbf", C=10, folds=3))
    wrong = np.flatnonzero(s.latest.rows["zone"].to_numpy() == "wrong_side")
    s.take_model_label(wrong[:3])
    s.confirm([int(wrong[3])])
    s.exclude([int(wrong[4])])
    s.fit()
    yield s
    s.close()


@pytest.fixture
def panel(qtbot, session):
    bus = ReviewBus()
    p = ViewsPanel(session, bus)
    qtbot.addWidget(p)
    p.resize(900, 650)
    p.show()
    qtbot.waitExposed(p)
    yield p
    p.shutdown()


def test_scatter_shows_the_projection_core_computed(panel, session) -> None:
    coords, _ = session.projection()
    drawn = panel.projection.drawn_points()
    x, y, rows = drawn["x"], drawn["y"], drawn["row"]
    assert sorted(rows) == list(range(session.n_rows))  # 300 rows: nothing sampled away
    np.testing.assert_array_equal(x, coords[rows, 0])
    np.testing.assert_array_equal(y, coords[rows, 1])
    # Suspects are drawn bigger than the rest.
    zones = session.latest.rows["zone"].to_numpy()[rows]
    sizes = drawn["size"]
    suspect = np.isin(zones, ["wrong_side", "inside_margin"])
    assert suspect.any() and (sizes[suspect] > sizes[~suspect].max()).all()
    # Reviewed rows carry their decision's symbol; points keep their given label's colour.
    symbols = drawn["symbol"]
    kept = int(np.flatnonzero(session.review == 1)[0])
    assert symbols[list(rows).index(kept)] == "s"


def test_the_legend_stays_off_the_points(panel, session) -> None:
    proj = panel.projection
    legend, plot = proj.legend, proj.plot_widget
    assert legend.isVisible()
    # The legend sits beside the plot, not over it, and names every class.
    assert not legend.geometry().intersects(plot.geometry())
    assert all(c in legend.text() for c in session.classes)


def test_clicking_a_point_selects_its_row(qtbot, panel, session) -> None:
    coords, _ = session.projection()
    # The most isolated point, so the click cannot land on a neighbour.
    d = np.linalg.norm(coords[:, None, :] - coords[None, :, :], axis=2)
    np.fill_diagonal(d, np.inf)
    row = int(np.argmax(d.min(axis=1)))
    proj = panel.projection
    vb = proj.plot.getViewBox()
    scene = vb.mapViewToScene(QPointF(*proj.point_position(row)))
    widget_pos = proj.plot_widget.mapFromScene(scene)
    with qtbot.waitSignal(panel.bus.row_selected, timeout=2000) as blocker:
        QTest.mouseClick(proj.plot_widget.viewport(), Qt.MouseButton.LeftButton, pos=widget_pos)
    assert blocker.args == [row]


def test_a_row_selected_elsewhere_is_ringed(panel, session) -> None:
    coords, _ = session.projection()
    panel.bus.row_selected.emit(17)
    x, y = panel.projection.ring.getData()
    assert (x[0], y[0]) == (coords[17, 0], coords[17, 1])


def test_histogram_bars_are_the_core_bins(panel, session) -> None:
    h = panel.histogram
    # It starts on the slack the ranking uses (held-out by default) and says so.
    assert session.latest.settings.score == "heldout"
    assert h.source_combo.currentData() == "heldout_slack"
    assert "held-out" in h.ranking_label.text()
    ref = plotdata.slack_histogram(session.latest.rows["heldout_slack"].to_numpy())
    np.testing.assert_array_equal(h.bars.opts["height"], ref.counts)
    # Training slack.
    h.source_combo.setCurrentIndex(h.source_combo.findData("slack"))
    ref = plotdata.slack_histogram(session.latest.rows["slack"].to_numpy())
    np.testing.assert_array_equal(h.bars.opts["height"], ref.counts)
    np.testing.assert_array_equal(h.bars.opts["x0"], ref.edges[:-1])
    # Held-out slack, one class.
    h.source_combo.setCurrentIndex(h.source_combo.findData("heldout_slack"))
    h.class_combo.setCurrentIndex(h.class_combo.findData("premium"))
    mask = np.array([v == "premium" for v in session.labels])
    ref = plotdata.slack_histogram(session.latest.rows["heldout_slack"].to_numpy(), mask)
    np.testing.assert_array_equal(h.bars.opts["height"], ref.counts)
    assert (
        ref.counts.sum()
        < plotdata.slack_histogram(session.latest.rows["heldout_slack"].to_numpy()).counts.sum()
    )


def test_dragging_the_threshold_filters_rows_above_it(qtbot, panel, session) -> None:
    h = panel.histogram
    line = h.threshold
    # Before any drag the line claims no filter: the list shows every row.
    assert "filter" in line.label.format and ">" not in line.label.format
    with qtbot.waitSignal(panel.bus.rows_filter, timeout=2000) as blocker:
        # What a drag ends with: the line moved, then "position change finished".
        line.setValue(0.4)
        line.sigPositionChangeFinished.emit(line)
    slack = session.latest.rows["heldout_slack"].to_numpy()
    np.testing.assert_array_equal(blocker.args[0], slack > 0.4)
    assert 0 < blocker.args[0].sum() < session.n_rows
    # The line now says what the list shows: which slack, the threshold, how many rows.
    assert f"held-out ξ > 0.40 ({int((slack > 0.4).sum()):,} rows)" in line.label.format
    with qtbot.waitSignal(panel.bus.rows_filter, timeout=2000) as blocker:
        h.clear_button.click()
    assert blocker.args == [None]
    assert ">" not in line.label.format


def test_compare_view_shows_compare_fits_numbers(qtbot, panel, session) -> None:
    panel.setCurrentWidget(panel.compare)
    comp = session.comparison()
    table = panel.compare.metrics
    # The first line names each side's settings: "after" is the edits alone, refitted with
    # the first fit's settings.
    assert table.item(0, 0).text() == "settings"
    assert table.item(0, 2).text() == "same as before"
    assert table.columnCount() == (6 if panel.compare.comparison.metrics_new else 4)
    shown = {
        table.item(i, 0).text(): [table.item(i, j).text() for j in (1, 2, 3)]
        for i in range(1, table.rowCount())
    }
    assert len(shown) == len(comp.metrics)
    b, a = comp.metrics["rows wrong side"]
    # Codes are shown by their one display name, never as the file code.
    assert shown["rows wrong side"] == [str(b), str(a), f"{a - b:+d}"]
    assert not any("_" in name for name in shown)
    # Every metric name is readable in full: its column is at least as wide as its text.
    fm = table.fontMetrics()
    widest = max(fm.horizontalAdvance(name) for name in shown)
    assert table.columnWidth(0) >= widest
    b, a = comp.metrics["held-out accuracy"]
    assert shown["held-out accuracy"][:2] == [f"{b:.4f}", f"{a:.4f}"]
    assert b != a  # the edits changed the fit, so the table has something to show
    model = panel.compare.changed_model
    assert model.rowCount() == len(comp.changed_rows) > 0
    # Each changed row carries its label and the model's label, not only its zones.
    first = int(comp.changed_rows["row"].to_numpy()[0])
    assert model.column_spec("label").values[0] == session.labels[first]
    assert model.column_spec("model_label_after").values[0] == str(
        comp.changed_rows["model_label_after"].to_numpy()[0]
    )
    # Clicking a changed row selects that table row.
    index = model.index(0, 0)
    want = int(comp.changed_rows["row"].to_numpy()[model.source_row(0)])
    with qtbot.waitSignal(panel.bus.row_selected, timeout=2000) as blocker:
        panel.compare.changed_view.clicked.emit(index)
    assert blocker.args == [want]
    assert "flatters" in panel.compare.caution.text()


def test_reference_scores_are_shown(panel, session) -> None:
    ids = [str(v) for v in session.ids]
    truth = session.source_labels.astype(str)
    reference = pd.DataFrame({"lot_id": ids[:100], "truth": truth[:100]})
    panel.compare.set_reference(reference, "lot_id", "truth")
    out = panel.compare.reference_scores
    assert out["matched"] == 100
    sug = session.baseline.rows["model_label"].to_numpy()[:100].astype(str)
    assert out["before"]["accuracy"] == pytest.approx(np.mean(sug == truth[:100]))
    assert _fmt(out["before"]["accuracy"]) in panel.compare.reference_label.text()


def test_c_curve_runs_in_the_background_and_a_click_asks_for_a_refit(qtbot, panel, session):
    c = panel.c_curve
    panel.setCurrentWidget(c)
    # Before it is computed: words, not empty axes.
    if not c.series:
        assert c.stack.currentWidget() is c.placeholder
    c.Cs = (0.1, 1.0, 10.0)
    c.kernel_combo.setCurrentText("linear")
    with qtbot.waitSignal(c.runner.finished, timeout=120_000):
        c.run_button.click()
    assert len(c.series) == 1 and list(c.series[0].C) == [0.1, 1.0, 10.0]
    assert c.run_button.isEnabled()
    assert c.stack.currentWidget() is c.layout_widget
    # The progress bar does not stay full once the curve is done.
    assert not c.progress_bar.isVisible() and c.progress_bar.value() == 0
    # One legend entry per measure, not one per measure and series.
    assert [len(legend.items) for legend in c.legends] == [2, 2]
    # The chosen C of the latest fit is marked.
    assert c.chosen_lines and c.chosen_lines[0].value() == pytest.approx(np.log10(10.0))
    series, _name, curve = next(x for x in c.curves if x[1] == "accuracy")
    np.testing.assert_array_equal(curve.getData()[1], series.accuracy)
    spot = curve.scatter.points()[2]
    with qtbot.waitSignal(panel.bus.refit_requested, timeout=2000) as blocker:
        curve.sigPointsClicked.emit(curve, [spot], None)
    settings = blocker.args[0]
    assert (settings.kernel, settings.C) == ("linear", 10.0)
    assert settings.folds == session.settings.folds and settings.seed == session.settings.seed


def test_c_curve_can_be_cancelled(qtbot, panel) -> None:
    c = panel.c_curve
    c.kernel_combo.setCurrentText("rbf")
    with qtbot.waitSignal(c.runner.cancelled, timeout=120_000):
        c.run_button.click()
        c.cancel_button.click()
    assert "cancelled" in c.status.text() and c.run_button.isEnabled()


def test_panel_redraws_after_a_new_fit(qtbot, panel, session) -> None:
    panel.setCurrentWidget(panel.histogram)
    before = panel.histogram.bars.opts["height"].copy()
    session.fit(FitSettings(kernel="rbf", C=0.5, folds=3))
    panel.bus.fit_changed.emit()
    after = plotdata.slack_histogram(session.latest.rows["heldout_slack"].to_numpy()).counts
    np.testing.assert_array_equal(panel.histogram.bars.opts["height"], after)
    assert not np.array_equal(before, after)
    session.fit(FitSettings(kernel="rbf", C=10, folds=3))


def test_views_render_to_png_for_the_html_summary(qtbot, session, tmp_path) -> None:
    images = render_views_png(session)
    assert len(images) == 3  # no C curve without a sweep
    assert all(png.startswith(b"\x89PNG") and len(png) > 5000 for png in images.values())
    out = write_summary_html(
        {"source_path": "lots.csv", "source_sha256": "0" * 64, "images": images},
        tmp_path / "summary.html",
    )
    assert out.read_text().count("data:image/png;base64,") == 3


def test_boundary_is_drawn_for_a_two_feature_table(qtbot, tmp_path) -> None:
    rng = np.random.default_rng(5)
    n = 120
    frame = pd.DataFrame(
        {
            "id": [f"r{i}" for i in range(n)],
            "width": np.r_[rng.normal(-1, 1, n // 2), rng.normal(1.5, 1, n // 2)],
            "depth": np.r_[rng.normal(0, 1, n // 2), rng.normal(1, 1, n // 2)],
            "kind": ["a"] * (n // 2) + ["b"] * (n // 2),
        }
    )
    frame.to_csv(tmp_path / "two.csv", index=False)
    with ReviewSession.open(tmp_path / "two.csv", label="kind", id_column="id") as s:
        s.fit(FitSettings(kernel="rbf", C=1, folds=0))
        p = ViewsPanel(s, ReviewBus())
        qtbot.addWidget(p)
        proj = p.projection
        assert proj.boundary.exact
        coords, _ = s.projection()
        ref = plotdata.boundary_in_projection(s.latest.model, s.X, coords)
        x, _ = proj.lines[0.0].getData()
        np.testing.assert_array_equal(x, ref.segments[0.0][:, [0, 2]].ravel())
        assert len(x) > 0


def test_new_settings_get_their_own_labelled_column(qtbot, tmp_path) -> None:
    pd.read_csv(DEMO).head(240).to_csv(tmp_path / "lots.csv", index=False)
    s = ReviewSession.open(tmp_path / "lots.csv", label="grade", id_column="lot_id")
    s.fit(FitSettings(kernel="rbf", C=10, folds=3))
    wrong = np.flatnonzero(s.latest.rows["zone"].to_numpy() == "wrong_side")
    s.take_model_label(wrong[:2])
    s.fit(FitSettings(kernel="rbf", C=1, folds=3))  # edits and a new C together
    panel = ViewsPanel(s, ReviewBus())
    qtbot.addWidget(panel)
    panel.setCurrentWidget(panel.compare)
    table = panel.compare.metrics
    headers = [table.horizontalHeaderItem(j).text() for j in range(table.columnCount())]
    assert headers == [
        "metric",
        "before",
        "after: edits alone",
        "change",
        "edits and new settings",
        "change",
    ]
    assert "C 10" in table.item(0, 1).text() and "C 1," in table.item(0, 4).text()
    comp = panel.compare.comparison
    # The edits-alone column is the edited labels refitted with the first fit's settings.
    assert comp.after_settings.same_fit_as(comp.before_settings)
    rows = {table.item(i, 0).text(): i for i in range(1, table.rowCount())}
    i = rows["rows wrong side"]
    assert table.item(i, 4).text() == f"{s.latest.summary.zone_counts['wrong_side']:,}"
    assert "other settings" in panel.compare.status.text()
    s.close()
