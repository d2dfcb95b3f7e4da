"""The notebook API: `reviewer.scan` and `reviewer.probe` on DataFrames and files."""

from __future__ import annotations

import io
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import reviewer
from reviewer import InputError, SettingsError

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "reviewer" / "demo_data" / "coffee_lots.csv"
FAST = {"kernel": "linear", "C": 1.0, "folds": 3}


def test_scan_equals_the_command_on_the_demo() -> None:
    table = reviewer.scan(DEMO, "grade", id="lot_id", **FAST)
    cli = subprocess.run(
        [sys.executable, "-m", "reviewer", "scan", str(DEMO), "--label", "grade", "--id",
         "lot_id", "--kernel", "linear", "--C", "1", "--folds", "3", "--quiet"],
        cwd=ROOT, capture_output=True, text=True, check=True,
    )  # fmt: skip
    from_cli = pd.read_csv(io.StringIO(cli.stdout))
    assert list(table.columns) == list(from_cli.columns)
    pd.testing.assert_frame_equal(
        pd.read_csv(io.StringIO(table.to_csv(index=False))), from_cli, check_exact=True
    )


def test_a_dataframe_keeps_its_index_and_matches_the_file() -> None:
    frame = pd.read_csv(DEMO)
    frame.index = pd.Index([f"r{i}" for i in range(len(frame))], name="entry")
    table = reviewer.scan(frame, "grade", id="lot_id", **FAST)
    assert table.index.equals(frame.index)
    from_file = reviewer.scan(DEMO, "grade", id="lot_id", **FAST)
    np.testing.assert_array_equal(table["rank"].to_numpy(), from_file["rank"].to_numpy())


@pytest.mark.parametrize(
    ("kwargs", "error", "named"),
    [
        ({"kernel": "sigmoid"}, SettingsError, "'kernel'"),
        ({"C": -1}, SettingsError, "'C'"),
        ({"C": "big"}, SettingsError, "'C'"),
        ({"gamma": "auto"}, SettingsError, "'gamma'"),
        ({"folds": 2.5}, SettingsError, "'folds'"),
        ({"seed": -3}, SettingsError, "seed"),
        ({"id": "no_such_column"}, InputError, "'id'"),
        ({"progress": 3}, SettingsError, "'progress'"),
    ],
)
def test_bad_arguments_raise_our_errors_naming_the_argument(kwargs, error, named) -> None:
    frame = pd.read_csv(DEMO).head(200)
    with pytest.raises(error, match=named):
        reviewer.scan(frame, "grade", **kwargs)


def test_bad_data_and_label_are_named() -> None:
    with pytest.raises(InputError, match="'data'"):
        reviewer.scan([1, 2, 3], "grade")  # type: ignore[arg-type]
    with pytest.raises(InputError, match="'label'"):
        reviewer.scan(pd.read_csv(DEMO).head(50), "quality")
    with pytest.raises(SettingsError, match="'rate'"):
        reviewer.probe(pd.read_csv(DEMO).head(50), "grade", rate=0.9)


def test_probe_reports_recovery_and_progress_is_called() -> None:
    seen: list[float] = []
    result = reviewer.probe(
        DEMO, "grade", id="lot_id", rate=0.05, progress=lambda f, m: seen.append(f), **FAST
    )
    assert result.n_flipped == round(0.05 * 1800)
    assert 0.5 < result.auroc <= 1.0
    assert seen and seen[-1] == pytest.approx(1.0) and seen == sorted(seen)


def test_the_estimator_works_in_scikit_learn_pipelines_and_cross_val_predict() -> None:
    # Reference: scikit-learn's own SVC on the same standardised features (LIBSVM, Chang &
    # Lin 2011) gives the same out-of-fold predictions for a linear kernel with C = 1.
    from sklearn.datasets import load_breast_cancer
    from sklearn.model_selection import StratifiedKFold, cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import SVC

    X, y = load_breast_cancer(return_X_y=True)
    folds = StratifiedKFold(5, shuffle=True, random_state=0)
    ours = make_pipeline(StandardScaler(), reviewer.SoftMarginClassifier(kernel="linear", C=1.0))
    ref = make_pipeline(StandardScaler(), SVC(kernel="linear", C=1.0))
    f_ours = cross_val_predict(ours, X, y, cv=folds, method="decision_function")
    f_ref = cross_val_predict(ref, X, y, cv=folds, method="decision_function")
    assert f_ours.shape == f_ref.shape == (len(y),)
    # Both stop at a dual-gradient tolerance of order 1e-3, so decisions agree to about 1e-2.
    np.testing.assert_allclose(f_ours, f_ref, atol=1e-2)
    assert (cross_val_predict(ours, X, y, cv=folds) == (f_ref > 0)).mean() > 0.995
