"""ArrayTableModel: what a reviewer sees in the list after sorting, filtering and colouring."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QItemSelectionModel, QPoint, Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QTableView

from reviewer.core.errors import InputError
from reviewer.gui import palette
from reviewer.gui.table_model import (
    RAW_VALUE_ROLE,
    SOURCE_ROW_ROLE,
    ArrayTableModel,
    ColumnSpec,
    link_sort_indicator,
    stable_order,
)

REPO = Path(__file__).resolve().parents[2]


def make_model() -> ArrayTableModel:
    return ArrayTableModel(
        [
            ColumnSpec("id", "Row", np.array([10, 11, 12, 13, 14, 15])),
            ColumnSpec("slack", "Slack", np.array([0.5, np.nan, 2.0, 0.5, np.nan, 1.25]), 2),
            ColumnSpec(
                "label",
                "Label",
                np.array(["dog", None, "cat", "ant", "cat", np.nan], dtype=object),
            ),
        ]
    )


def column_text(model: ArrayTableModel, col: int) -> list[str]:
    return [model.index(r, col).data() for r in range(model.rowCount())]


def view_sources(model: ArrayTableModel) -> list[int]:
    return [model.source_row(r) for r in range(model.rowCount())]


def test_display_formats_floats_ints_text_and_missing(qtbot):
    model = make_model()
    assert model.rowCount() == 6 and model.columnCount() == 3
    assert column_text(model, 0) == ["10", "11", "12", "13", "14", "15"]
    assert column_text(model, 1) == ["0.50", "", "2.00", "0.50", "", "1.25"]
    assert column_text(model, 2) == ["dog", "", "cat", "ant", "cat", ""]
    assert model.headerData(1, Qt.Orientation.Horizontal) == "Slack"
    assert model.index(2, 1).data(RAW_VALUE_ROLE) == 2.0
    assert model.index(1, 1).data(RAW_VALUE_ROLE) is None


def test_sort_ascending_nan_last_and_ties_in_source_order(qtbot):
    model = make_model()
    model.sort_by("slack")
    # 0.5 (rows 0 and 3, source order kept), 1.25, 2.0, then the two NaN rows.
    assert view_sources(model) == [0, 3, 5, 2, 1, 4]
    assert column_text(model, 1) == ["0.50", "0.50", "1.25", "2.00", "", ""]


def test_sort_descending_still_puts_nan_last(qtbot):
    model = make_model()
    model.sort_by("slack", descending=True)
    assert view_sources(model) == [2, 5, 0, 3, 1, 4]
    assert model.sort_key == "slack" and model.sort_descending


def test_object_column_sorts_as_text_with_missing_last(qtbot):
    model = make_model()
    model.sort_by("label")
    assert column_text(model, 2) == ["ant", "cat", "cat", "dog", "", ""]
    assert view_sources(model) == [3, 2, 4, 0, 1, 5]
    model.sort_by("label", descending=True)
    assert column_text(model, 2) == ["dog", "cat", "cat", "ant", "", ""]
    assert view_sources(model) == [0, 2, 4, 3, 1, 5]


def test_mixed_object_values_sort_by_their_text(qtbot):
    model = ArrayTableModel([ColumnSpec("v", "V", np.array([10, "b", 9, None], dtype=object))])
    model.sort_by("v")
    # As text "10" < "9" < "b": the documented rule for object columns.
    assert column_text(model, 0) == ["10", "9", "b", ""]


def test_stable_order_matches_a_python_sort(qtbot):
    rng = np.random.default_rng(3)
    keys = rng.integers(0, 5, 200).astype(float)
    keys[rng.random(200) < 0.1] = np.nan
    missing = np.isnan(keys)
    present = [i for i in range(200) if not missing[i]]
    absent = [i for i in range(200) if missing[i]]
    # Python's sorted() is stable; reverse=True also keeps ties in original order.
    asc = sorted(present, key=lambda i: keys[i]) + absent
    desc = sorted(present, key=lambda i: keys[i], reverse=True) + absent
    assert stable_order(keys, missing, False).tolist() == asc
    assert stable_order(keys, missing, True).tolist() == desc


def test_filter_keeps_sort_and_round_trip(qtbot):
    model = make_model()
    model.sort_by("slack", descending=True)
    mask = np.array([True, True, False, True, False, True])
    model.set_filter(mask)
    assert view_sources(model) == [5, 0, 3, 1]
    for v in range(model.rowCount()):
        assert model.view_row(model.source_row(v)) == v
        assert model.index(v, 0).data(SOURCE_ROW_ROLE) == model.source_row(v)
    assert model.view_row(2) is None and model.view_row(4) is None
    model.set_filter(None)
    assert model.rowCount() == 6
    assert view_sources(model) == [2, 5, 0, 3, 1, 4]
    with pytest.raises(IndexError):
        model.source_row(6)
    with pytest.raises(IndexError):
        model.view_row(-1)


def test_filter_of_wrong_length_is_refused(qtbot):
    model = make_model()
    with pytest.raises(InputError, match="filter mask: 3 values for 6 rows"):
        model.set_filter(np.ones(3, dtype=bool))


def test_columns_of_unequal_length_are_refused(qtbot):
    with pytest.raises(InputError, match="a=2, b=3"):
        ArrayTableModel([ColumnSpec("a", "A", np.zeros(2)), ColumnSpec("b", "B", np.zeros(3))])


def test_update_values_keeps_view_order(qtbot):
    model = make_model()
    model.sort_by("slack")
    before = view_sources(model)
    with qtbot.waitSignal(model.dataChanged):
        model.update_values("slack", np.array([9.0, 8.0, 7.0, 6.0, 5.0, 4.0]))
    assert view_sources(model) == before
    assert column_text(model, 1) == ["9.00", "6.00", "4.00", "7.00", "8.00", "5.00"]
    # A later sort uses the new values, not a stale cache.
    model.sort_by("slack")
    assert view_sources(model) == [5, 4, 3, 2, 1, 0]


def test_row_styles_follow_the_row_through_a_sort(qtbot):
    model = make_model()
    zones = np.array(["clear", "wrong_side", "inside_margin", "clear", "wrong_side", "clear"])
    styles = palette.zone_row_styles()
    model.set_row_style(palette.codes_for(zones, palette.ZONES), styles)
    wrong_bg = styles[palette.ZONES.index("wrong_side")][0]
    assert model.index(1, 0).data(Qt.ItemDataRole.BackgroundRole) == wrong_bg
    assert model.index(0, 0).data(Qt.ItemDataRole.BackgroundRole) is None  # clear: default
    model.sort_by("id", descending=True)  # source row 1 is now at view row 4
    assert model.index(4, 2).data(Qt.ItemDataRole.BackgroundRole) == wrong_bg
    assert model.index(4, 2).data(Qt.ItemDataRole.ForegroundRole) == QColor(palette.TEXT)
    model.set_row_style(None)
    assert model.index(4, 2).data(Qt.ItemDataRole.BackgroundRole) is None


def _selected_sources(view: QTableView, model: ArrayTableModel) -> list[int]:
    rows = view.selectionModel().selectedRows()
    return sorted(model.source_row(i.row()) for i in rows)


def test_selection_and_current_row_survive_resort_and_filter(qtbot):
    model = make_model()
    view = QTableView()
    qtbot.addWidget(view)
    view.setModel(model)
    view.setSelectionBehavior(QTableView.SelectionBehavior.SelectRows)
    sel = view.selectionModel()
    flags = QItemSelectionModel.SelectionFlag.Select | QItemSelectionModel.SelectionFlag.Rows
    sel.select(model.index(2, 0), flags)
    sel.select(model.index(5, 0), flags)
    sel.setCurrentIndex(model.index(5, 1), QItemSelectionModel.SelectionFlag.NoUpdate)
    assert _selected_sources(view, model) == [2, 5]

    model.sort_by("slack", descending=True)  # rows 2 and 5 move to the top
    assert _selected_sources(view, model) == [2, 5]
    assert {i.row() for i in sel.selectedRows()} == {0, 1}
    assert model.source_row(view.currentIndex().row()) == 5

    model.set_filter(np.array([True, True, False, True, True, True]))
    assert _selected_sources(view, model) == [5]
    assert view.verticalHeader().count() == 5


def test_header_click_sorts_and_toggles_direction(qtbot):
    model = make_model()
    view = QTableView()
    qtbot.addWidget(view)
    view.setModel(model)
    view.setSortingEnabled(True)
    view.resize(500, 300)
    view.show()
    qtbot.waitExposed(view)
    header = view.horizontalHeader()
    x = header.sectionViewportPosition(1) + header.sectionSize(1) // 2
    pos = QPoint(x, header.height() // 2)

    qtbot.mouseClick(header.viewport(), Qt.MouseButton.LeftButton, pos=pos)
    first = (model.sort_key, model.sort_descending)
    qtbot.mouseClick(header.viewport(), Qt.MouseButton.LeftButton, pos=pos)
    second = (model.sort_key, model.sort_descending)
    assert first[0] == second[0] == "slack"
    assert first[1] != second[1]
    expected = [2, 5, 0, 3, 1, 4] if second[1] else [0, 3, 5, 2, 1, 4]
    assert view_sources(model) == expected
    # What the table shows on screen follows the sort.
    shown = [view.model().index(r, 1).data() for r in range(model.rowCount())]
    assert shown[-2:] == ["", ""]


def test_sort_changed_signal_reports_key_and_direction(qtbot):
    model = make_model()
    with qtbot.waitSignal(model.sort_changed) as blocker:
        model.sort_by("label", descending=True)
    assert blocker.args == ["label", True]


def test_benchmark_smoke_writes_both_result_files(tmp_path):
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", PYTHONPATH=str(REPO))
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "tests.benchmarks.window_table",
            "--smoke",
            "--out-dir",
            str(tmp_path),
        ],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    data = json.loads((tmp_path / "window_table.json").read_text())
    assert data["rows"] == 10_000 and data["columns"] == 8
    assert data["cores"] >= 1 and data["pyside6"]
    assert data["show_seconds"]["median"] > 0 and data["resort_seconds"]["median"] > 0
    md = (tmp_path / "window_table.md").read_text()
    assert "PySide6" in md and "10,000" in md


def test_sort_in_code_moves_the_header_arrow_without_a_second_sort(qtbot):
    model = make_model()
    view = QTableView()
    qtbot.addWidget(view)
    view.setModel(model)
    view.horizontalHeader().setSortIndicator(0, Qt.SortOrder.AscendingOrder)
    view.setSortingEnabled(True)
    link_sort_indicator(view, model)
    sorts: list[tuple[str, bool]] = []
    model.sort_changed.connect(lambda k, d: sorts.append((k, d)))
    model.sort_by("label", descending=True)
    header = view.horizontalHeader()
    assert header.sortIndicatorSection() == 2
    assert header.sortIndicatorOrder() == Qt.SortOrder.DescendingOrder
    assert sorts == [("label", True)]
    assert view_sources(model) == [0, 2, 4, 3, 1, 5]
