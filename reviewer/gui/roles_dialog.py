"""The column-roles dialog: which column holds the label, which the row id, and how each
other column is used, chosen over a preview of the first rows."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QScrollArea,
    QTableView,
    QVBoxLayout,
    QWidget,
)

from reviewer.core.door import KINDS, TablePreview
from reviewer.gui.table_model import ArrayTableModel, ColumnSpec

NO_ID = "(none: rows are matched by position)"
KIND_TIPS = {
    "numeric": "numbers, standardised",
    "categorical": "a few levels, one indicator per level",
    "text": "free text, as TF-IDF word and character n-gram features",
    "vector": "one vector of numbers per row (an embedding), standardised",
    "ignore": "left out of the fit; still shown in the row panel",
}
#: Widest a preview column starts (pixels); longer text elides, its tooltip shows it all.
PREVIEW_MAX_WIDTH = 320


def _remembered_kinds(remembered: dict[str, Any] | None) -> dict[str, str]:
    roles = (remembered or {}).get("roles") or {}
    kinds: dict[str, str] = {}
    for col in roles.get("numeric", []):
        kinds[col] = "numeric"
    for col in roles.get("categorical", []):
        kinds[col] = "categorical"
    for col in roles.get("ignored", {}):
        kinds[col] = "ignore"
    # Session files that know the text and vector kinds list those columns too.
    for kind in ("text", "vector"):
        for col in roles.get(kind, []) or []:
            kinds[col] = kind
    return kinds


class RolesDialog(QDialog):
    """Shows ``preview`` and returns the reviewer's choices through :meth:`choices`."""

    def __init__(self, preview: TablePreview, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.preview = preview
        self.setWindowTitle(f"Column roles: {preview.source.path.name}")
        self.resize(900, 640)
        remembered = preview.remembered or {}
        layout = QVBoxLayout(self)

        intro = QLabel(
            "Choose the column with the labels to review and, if there is one, the column "
            "that names each row. Every other column is a feature ("
            + ", ".join(k for k in KINDS if k != "ignore")
            + ") or left out (ignore)."
            + ("  Choices saved in this file's session are filled in." if remembered else "")
        )
        intro.setWordWrap(True)
        layout.addWidget(intro)

        head = preview.head
        self.head_model = ArrayTableModel(
            [
                ColumnSpec(
                    f"c{i}", str(c), np.asarray(head[c].astype(object).to_numpy(), dtype=object)
                )
                for i, c in enumerate(preview.columns)
            ]
        )
        table = QTableView()
        table.setModel(self.head_model)
        table.setObjectName("preview_table")
        table.verticalHeader().setDefaultSectionSize(22)
        table.setMaximumHeight(220)
        table.setTextElideMode(Qt.TextElideMode.ElideRight)
        # Columns as wide as their header and values (up to a limit), so text reads in full.
        table.resizeColumnsToContents()
        header = table.horizontalHeader()
        for i in range(header.count()):
            header.resizeSection(i, min(max(header.sectionSize(i), 60), PREVIEW_MAX_WIDTH))
        self.preview_table = table
        layout.addWidget(table)

        form = QFormLayout()
        self.label_combo = QComboBox()
        self.label_combo.addItems(preview.columns)
        label = remembered.get("label") or preview.guessed_label
        if label in preview.columns:
            self.label_combo.setCurrentText(label)
        self.id_combo = QComboBox()
        self.id_combo.addItems([NO_ID, *preview.columns])
        ident = remembered.get("id") if remembered else preview.guessed_id
        if ident in preview.columns:
            self.id_combo.setCurrentText(ident)
        form.addRow("Label column", self.label_combo)
        form.addRow("Row id column", self.id_combo)
        # An optional .npy file of one vector per row (embeddings), matched by row order.
        self.vectors_edit = QLineEdit()
        self.vectors_edit.setObjectName("vectors_file")
        self.vectors_edit.setPlaceholderText("optional: one vector per row, in row order")
        self.vectors_edit.setClearButtonEnabled(True)
        saved_vectors = remembered.get("vectors")
        if isinstance(saved_vectors, str) and saved_vectors:
            self.vectors_edit.setText(saved_vectors)
        choose = QPushButton("Choose…")
        choose.setObjectName("choose_vectors")
        choose.clicked.connect(self._choose_vectors)
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.vectors_edit, 1)
        row.addWidget(choose)
        form.addRow("Vectors file (.npy)", row)
        layout.addLayout(form)

        box = QGroupBox("Features")
        grid = QGridLayout(box)
        saved = _remembered_kinds(remembered)
        self.kind_combos: dict[str, QComboBox] = {}
        self.kind_notes: dict[str, tuple[QLabel, str]] = {}
        for i, col in enumerate(preview.columns):
            kind, reason = preview.kinds.get(col, ("ignore", ""))
            combo = QComboBox()
            combo.addItems(list(KINDS))
            for j, k in enumerate(KINDS):
                combo.setItemData(j, KIND_TIPS.get(k, ""), Qt.ItemDataRole.ToolTipRole)
            combo.setCurrentText(saved.get(col, kind))
            self.kind_combos[col] = combo
            name = QLabel(str(col))
            note = QLabel(reason)
            note.setObjectName("hint")
            self.kind_notes[col] = (note, reason)
            grid.addWidget(name, i, 0)
            grid.addWidget(combo, i, 1)
            grid.addWidget(note, i, 2)
        grid.setColumnStretch(2, 1)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(box)
        layout.addWidget(scroll, 1)

        buttons = QDialogButtonBox(
            QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel
        )
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Open")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.buttons = buttons

        self.label_combo.currentTextChanged.connect(self._sync_enabled)
        self.id_combo.currentTextChanged.connect(self._sync_enabled)
        self._sync_enabled()

    def _choose_vectors(self) -> None:
        start = str(self.preview.source.path.parent)
        path, _ = QFileDialog.getOpenFileName(
            self, "Vectors file: one row per table row", start, "NumPy arrays (*.npy);;All (*)"
        )
        if path:
            self.vectors_edit.setText(path)

    def vectors(self) -> Path | None:
        """The vectors file chosen, or None."""
        text = self.vectors_edit.text().strip()
        return Path(text).expanduser() if text else None

    def _sync_enabled(self) -> None:
        # The label and id columns are not features, so their kind choice does not apply.
        label, ident = self.label_combo.currentText(), self.id_combo.currentText()
        for col, combo in self.kind_combos.items():
            role = "the label column" if col == label else "the row id" if col == ident else ""
            combo.setEnabled(not role)
            note, reason = self.kind_notes[col]
            # Say why the box is off, besides its greyed look.
            note.setText(f"not a feature: {role}" if role else reason)

    def choices(self) -> tuple[str, str | None, dict[str, str]]:
        """(label column, id column or None, overrides for the kinds that differ from the guess)."""
        label = self.label_combo.currentText()
        chosen_id = self.id_combo.currentText()
        ident = None if chosen_id == NO_ID else chosen_id
        overrides: dict[str, str] = {}
        for col, combo in self.kind_combos.items():
            if col in (label, ident):
                continue
            guessed = self.preview.kinds.get(col, ("ignore", ""))[0]
            if combo.currentText() != guessed:
                overrides[col] = combo.currentText()
        return label, ident, overrides
