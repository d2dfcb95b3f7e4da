"""Fit settings as widgets: reads and writes a FitSettings, nothing more."""

from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtWidgets import (
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from reviewer.core import door
from reviewer.core.errors import SettingsError
from reviewer.core.values import KERNELS, SCORES, FitSettings
from reviewer.gui.help_text import ranking_words

_SCORE_TEXT = {"heldout": "held-out slack", "training": "training slack"}


class SettingsPanel(QWidget):
    """Kernel, C, gamma, class weights, folds, ranking score; ``refit_clicked`` asks for a fit."""

    refit_clicked = Signal()

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("settings_panel")
        layout = QVBoxLayout(self)
        form = QFormLayout()
        self.kernel = QComboBox()
        self.kernel.addItems(["auto", *KERNELS])
        self.kernel.setToolTip("auto chooses kernel, C and gamma by cross-validation")
        self.C = QDoubleSpinBox()
        self.C.setDecimals(4)
        self.C.setRange(0.0001, 1_000_000.0)
        self.C.setValue(1.0)
        self.C.setToolTip("Penalty per unit of slack: larger C bends the boundary round more rows")
        self.gamma = QLineEdit("scale")
        self.gamma.setToolTip("RBF / poly width: a positive number or 'scale'")
        self.weights = QComboBox()
        self.weights.addItems(["none", "balanced"])
        self.folds = QSpinBox()
        self.folds.setRange(0, 50)
        self.folds.setValue(5)
        self.folds.setToolTip("Folds for held-out slack; 0 turns held-out values off")
        self.score = QComboBox()
        for s in SCORES:
            self.score.addItem(_SCORE_TEXT.get(s, s), s)
        form.addRow("Kernel", self.kernel)
        form.addRow("C", self.C)
        form.addRow("Gamma", self.gamma)
        form.addRow("Class weights", self.weights)
        form.addRow("Folds", self.folds)
        form.addRow("Rank by", self.score)
        self.cluster = QLineEdit("")
        self.cluster.setObjectName("cluster_address")
        self.cluster.setPlaceholderText("this computer")
        self.cluster.setToolTip(
            "A Dask scheduler (tcp://HOST:PORT) to run the held-out folds on; empty runs them "
            "on this computer's cores. The results are the same either way."
        )
        form.addRow("Cluster address", self.cluster)
        layout.addLayout(form)
        self.used = QLabel("")
        self.used.setObjectName("hint")
        self.used.setWordWrap(True)
        layout.addWidget(self.used)
        self.refit_button = QPushButton("Refit  (F5)")
        self.refit_button.clicked.connect(self.refit_clicked)
        layout.addWidget(self.refit_button)
        self.ranking = QLabel("")
        self.ranking.setObjectName("hint")
        self.ranking.setWordWrap(True)
        layout.addWidget(self.ranking)
        layout.addStretch(1)
        self.score.currentIndexChanged.connect(self._say_ranking)
        self._say_ranking()
        self.kernel.currentTextChanged.connect(self._sync)
        self._sync()

    def _say_ranking(self, *_: object) -> None:
        self.ranking.setText(
            "The list is ranked by " + ranking_words(str(self.score.currentData())) + "."
        )

    def _sync(self) -> None:
        manual = self.kernel.currentText() != "auto"
        self.C.setEnabled(manual)
        self.gamma.setEnabled(manual and self.kernel.currentText() != "linear")

    def set_settings(self, s: FitSettings) -> None:
        self.kernel.setCurrentText(s.kernel)
        if s.C is not None:
            self.C.setValue(float(s.C))
        self.gamma.setText(str(s.gamma))
        self.weights.setCurrentText(s.class_weight or "none")
        self.folds.setValue(int(s.folds))
        self.score.setCurrentIndex(max(0, self.score.findData(s.score)))
        self._base = s
        self._sync()

    def settings(self) -> FitSettings:
        """The settings shown; raises SettingsError for a gamma that is not a number or 'scale'."""
        base = getattr(self, "_base", FitSettings())
        text = self.gamma.text().strip()
        try:
            gamma: float | str = "scale" if text in ("", "scale") else float(text)
        except ValueError:
            raise SettingsError(
                f"gamma must be a positive number or 'scale', got {text!r}"
            ) from None
        auto = self.kernel.currentText() == "auto"
        return FitSettings(
            kernel=self.kernel.currentText(),
            C=None if auto else float(self.C.value()),
            gamma=gamma,
            degree=base.degree,
            class_weight=None if self.weights.currentText() == "none" else "balanced",
            folds=int(self.folds.value()),
            seed=base.seed,
            score=str(self.score.currentData()),
            solver=base.solver,
        ).validate()

    def cluster_address(self) -> str | None:
        """The cluster address typed, or None for this computer; SettingsError if malformed."""
        text = self.cluster.text().strip()
        return door.check_address(text) if text else None

    def show_used(self, used: FitSettings | None) -> None:
        """Show what the latest fit actually used (auto resolved)."""
        if used is None:
            self.used.setText("No fit yet.")
            return

        def num(v: object) -> str:
            return f"{v:.4g}" if isinstance(v, (int, float)) else str(v)

        parts = [f"kernel {used.kernel}", f"C {num(used.C)}"]
        if used.kernel != "linear":
            gamma = used.gamma_value if used.gamma_value is not None else used.gamma
            parts.append(f"gamma {num(gamma)}")
        asked_auto = self.kernel.currentText() == "auto"
        if asked_auto and used.C is not None:
            # Under auto the C box is disabled; show in it the C that auto chose.
            self.C.setValue(float(used.C))
        self.used.setText(("auto chose: " if asked_auto else "Latest fit: ") + ", ".join(parts))
