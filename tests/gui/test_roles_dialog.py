"""The column-roles dialog: the reviewer's choices reach ReviewSession.open."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtWidgets import QApplication, QDialogButtonBox

from reviewer.core.review.session import ReviewSession
from reviewer.gui.main_window import MainWindow
from reviewer.gui.reporting import MessageLog
from reviewer.gui.roles_dialog import NO_ID, PREVIEW_MAX_WIDTH, RolesDialog

DEMO = Path(__file__).resolve().parents[2] / "reviewer" / "demo_data" / "coffee_lots.csv"


@pytest.fixture
def data(tmp_path) -> Path:
    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope, str(tmp_path / "ini"))
    path = tmp_path / "coffee_lots.csv"
    shutil.copy(DEMO, path)
    return path


def test_dialog_shows_guesses(qtbot, data):
    dlg = RolesDialog(ReviewSession.preview(data))
    qtbot.addWidget(dlg)
    assert dlg.label_combo.currentText() == "grade"
    assert dlg.id_combo.currentText() in ("lot_id", NO_ID)
    assert dlg.head_model.rowCount() == 20
    label, _ident, overrides = dlg.choices()
    assert label == "grade" and overrides == {}
    # The label and id columns are not features: their kind boxes are off and say why.
    assert not dlg.kind_combos["grade"].isEnabled()
    assert "label column" in dlg.kind_notes["grade"][0].text()
    assert dlg.kind_combos["altitude_m"].isEnabled()
    # The preview shows text in full (up to a generous width), headers not cut.
    table = dlg.preview_table
    fm = table.fontMetrics()
    model = dlg.head_model
    for col in range(model.columnCount()):
        header = str(model.headerData(col, Qt.Orientation.Horizontal))
        width = table.columnWidth(col)
        assert width >= min(fm.horizontalAdvance(header), PREVIEW_MAX_WIDTH - 20), header
        longest = max(
            (str(model.data(model.index(r, col))) for r in range(model.rowCount())), key=len
        )
        assert width >= min(fm.horizontalAdvance(longest), PREVIEW_MAX_WIDTH - 20), header


def test_choices_reach_the_session(qtbot, data, monkeypatch):
    seen = {}
    real_open = ReviewSession.open

    def spy(path, **kwargs):
        seen.update(kwargs)
        return real_open(path, **kwargs)

    monkeypatch.setattr(ReviewSession, "open", staticmethod(spy))
    win = MainWindow(auto_fit=False, reporter=MessageLog())
    qtbot.addWidget(win)

    def choose():
        dlg = next(
            w
            for w in QApplication.topLevelWidgets()
            if isinstance(w, RolesDialog) and w.isVisible()
        )
        dlg.label_combo.setCurrentText("processing")
        dlg.id_combo.setCurrentText("lot_id")
        dlg.kind_combos["screen_size"].setCurrentText("categorical")
        dlg.kind_combos["cupper_note"].setCurrentText("ignore")
        dlg.buttons.button(QDialogButtonBox.StandardButton.Ok).click()

    QTimer.singleShot(200, choose)
    assert win.open_path(data)
    assert seen["label"] == "processing"
    assert seen["id_column"] == "lot_id"
    assert seen["overrides"]["screen_size"] == "categorical"
    s = win.session
    assert s.roles.label == "processing"
    assert "screen_size" in s.roles.categorical
    assert "cupper_note" in s.roles.ignored
    # The list's label column now shows the chosen column's values.
    assert set(win.model.column_spec("label").values) == set(s.frame["processing"].astype(str))

    # Reopening the file: the dialog starts from the choices saved in its session file.
    win.close()
    dlg = RolesDialog(ReviewSession.preview(data))
    qtbot.addWidget(dlg)
    assert dlg.label_combo.currentText() == "processing"
    assert dlg.kind_combos["screen_size"].currentText() == "categorical"


def test_the_preview_is_read_off_the_gui_thread(qtbot, data, monkeypatch):
    import threading

    seen = {}
    real_preview = ReviewSession.preview

    def spy(path, **kwargs):
        seen["thread"] = threading.current_thread()
        return real_preview(path, **kwargs)

    monkeypatch.setattr(ReviewSession, "preview", staticmethod(spy))
    win = MainWindow(auto_fit=False, reporter=MessageLog())
    qtbot.addWidget(win)

    def cancel():
        dlg = next(
            w
            for w in QApplication.topLevelWidgets()
            if isinstance(w, RolesDialog) and w.isVisible()
        )
        # The dialog shows the first rows only.
        assert dlg.head_model.rowCount() == 20
        dlg.reject()

    QTimer.singleShot(200, cancel)
    assert not win.open_path(data)
    assert seen["thread"] is not threading.main_thread()


def test_a_workbook_asks_for_the_sheet_and_opens_it(qtbot, tmp_path, monkeypatch):
    import pandas as pd
    from PySide6.QtWidgets import QInputDialog

    book = tmp_path / "lots.xlsx"
    with pd.ExcelWriter(book) as writer:
        pd.DataFrame({"about": ["harvest notes"]}).to_excel(writer, sheet_name="Notes", index=False)
        pd.read_csv(DEMO).head(150).to_excel(writer, sheet_name="Lots", index=False)
    asked = {}

    def pick(parent, title, text, items, current, editable):
        asked["items"] = list(items)
        return "Lots", True

    monkeypatch.setattr(QInputDialog, "getItem", staticmethod(pick))
    win = MainWindow(auto_fit=False, reporter=MessageLog())
    qtbot.addWidget(win)

    def choose():
        dlg = next(
            w
            for w in QApplication.topLevelWidgets()
            if isinstance(w, RolesDialog) and w.isVisible()
        )
        assert "grade" in dlg.preview.columns  # the preview is of the chosen sheet
        dlg.label_combo.setCurrentText("grade")
        dlg.id_combo.setCurrentText("lot_id")
        dlg.buttons.button(QDialogButtonBox.StandardButton.Ok).click()

    QTimer.singleShot(300, choose)
    assert win.open_path(book)
    assert asked["items"] == ["Notes", "Lots"]
    assert win.session.loaded.source.sheet == "Lots" and win.session.n_rows == 150


CONTRACT_KINDS = ("numeric", "categorical", "text", "vector", "ignore")


def test_every_kind_is_offered_and_remembered_text_columns_come_back(qtbot, data, monkeypatch):
    import reviewer.gui.roles_dialog as roles_dialog

    # The kinds come from the door; pinned here to the five the roles know, so the dialog's
    # side is checked whatever the core offers.
    monkeypatch.setattr(roles_dialog, "KINDS", CONTRACT_KINDS)
    preview = ReviewSession.preview(data)
    preview.remembered = {
        "label": "grade",
        "id": "lot_id",
        "roles": {"numeric": ["altitude_m"], "text": ["cupper_note"], "vector": []},
    }
    dlg = RolesDialog(preview)
    qtbot.addWidget(dlg)
    combo = dlg.kind_combos["cupper_note"]
    assert [combo.itemText(i) for i in range(combo.count())] == list(CONTRACT_KINDS)
    assert combo.currentText() == "text"
    assert "TF-IDF" in combo.itemData(2, Qt.ItemDataRole.ToolTipRole)
    dlg.kind_combos["harvest_date"].setCurrentText("vector")
    _label, _ident, overrides = dlg.choices()
    assert overrides["harvest_date"] == "vector"
    # Kept as text: an override unless the guess already was text.
    assert overrides.get("cupper_note", preview.kinds["cupper_note"][0]) == "text"


def test_a_vectors_file_chosen_in_the_dialog_reaches_the_open(qtbot, data, monkeypatch, tmp_path):
    import numpy as np

    vectors = tmp_path / "lots.npy"
    np.save(vectors, np.zeros((1800, 3)))
    seen: list[dict] = []
    real_open = ReviewSession.open

    def spy(path, **kwargs):
        seen.append(dict(kwargs))
        kwargs.pop("vectors", None)  # the window's side only: what reaches the open
        return real_open(path, **kwargs)

    monkeypatch.setattr(ReviewSession, "open", staticmethod(spy))
    win = MainWindow(auto_fit=False, reporter=MessageLog())
    qtbot.addWidget(win)

    def choose(path: str):
        dlg = next(
            w
            for w in QApplication.topLevelWidgets()
            if isinstance(w, RolesDialog) and w.isVisible()
        )
        dlg.vectors_edit.setText(path)
        dlg.buttons.button(QDialogButtonBox.StandardButton.Ok).click()

    QTimer.singleShot(200, lambda: choose(str(vectors)))
    assert win.open_path(data)
    assert seen[-1]["vectors"] == vectors
    win.session.close()
    # Left empty, no vectors argument is passed at all.
    QTimer.singleShot(200, lambda: choose(""))
    assert win.open_path(data)
    assert "vectors" not in seen[-1]
    win.close()


def test_the_vectors_file_becomes_features_of_the_opened_session(qtbot, data, tmp_path):
    import numpy as np

    vectors = tmp_path / "lots.npy"
    np.save(vectors, np.random.default_rng(0).normal(size=(1800, 4)))
    win = MainWindow(auto_fit=False, reporter=MessageLog())
    qtbot.addWidget(win)

    def choose():
        dlg = next(
            w
            for w in QApplication.topLevelWidgets()
            if isinstance(w, RolesDialog) and w.isVisible()
        )
        dlg.vectors_edit.setText(str(vectors))
        dlg.buttons.button(QDialogButtonBox.StandardButton.Ok).click()

    QTimer.singleShot(200, choose)
    assert win.open_path(data)
    names = list(win.session.feature_names)
    assert [n for n in names if n.startswith("vectors[")] == [f"vectors[{j}]" for j in range(4)]
    win.close()
