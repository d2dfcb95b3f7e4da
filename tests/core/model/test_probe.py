"""The probe plants known flips in a copy of the table and reports where the ranking puts them."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.cli import main
from reviewer.core.data.loading import LoadedTable
from reviewer.core.errors import ReviewerError, SettingsError
from reviewer.core.model.probe import CAUTION, plant_flips, probe_labels, probe_table
from reviewer.core.values import FitSettings

DEMO = Path(__file__).resolve().parents[3] / "reviewer" / "demo_data" / "coffee_lots.csv"


def clean_blobs(n_per_class: int = 80, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Three well-separated Gaussian classes: every planted flip sits deep in another class."""
    rng = np.random.default_rng(seed)
    centres = np.array([[0.0, 0.0], [6.0, 0.0], [0.0, 6.0]])
    X = np.vstack([rng.normal(c, 1.0, size=(n_per_class, 2)) for c in centres])
    y = np.repeat(np.array(["north", "east", "west"], dtype=object), n_per_class)
    return X, y


def test_probe_recovers_most_flips_on_a_clean_signal() -> None:
    X, y = clean_blobs()
    result = probe_labels(X, y, FitSettings(kernel="linear", C=1.0, folds=3), rate=0.1, seed=1)
    assert result.n_flipped == 24  # 10% of 240 labelled rows
    top_k = result.top[0]
    # Measured 24 of 24 found in the top k, AP 1.0; floors leave room for solver differences.
    assert top_k["reviewed"] == 24
    assert top_k["found"] >= 20
    assert result.average_precision >= 0.85
    assert result.auroc >= 0.95
    # Deeper reviews can only find more.
    found = [d["found"] for d in result.top[1:]]
    assert found == sorted(found)


def test_planted_labels_differ_from_the_source_and_the_input_is_untouched() -> None:
    _, y = clean_blobs()
    before = y.copy()
    planted, rows = plant_flips(y, 0.2, seed=7)
    assert len(rows) == 48
    assert np.all(planted[rows] != y[rows])
    untouched = np.setdiff1d(np.arange(len(y)), rows)
    assert np.all(planted[untouched] == y[untouched])
    assert set(planted[rows]) <= set(y)  # flips go to classes that exist
    assert np.array_equal(y, before)


def test_unlabelled_rows_are_never_flipped() -> None:
    _, y = clean_blobs()
    y = y.copy()
    y[::4] = None
    planted, rows = plant_flips(y, 0.3, seed=0)
    assert all(planted[r] is None for r in range(0, len(y), 4))
    assert all(y[r] is not None for r in rows)
    assert len(rows) == round(0.3 * 180)


@pytest.mark.parametrize("rate", [0.0, -0.1, 0.5, 0.9])
def test_rate_out_of_range_is_refused(rate: float) -> None:
    _, y = clean_blobs()
    with pytest.raises(SettingsError, match=r"probe rate must be above 0 and below 0\.5"):
        plant_flips(y, rate, seed=0)


def test_probe_table_names_flipped_rows_by_id_and_leaves_the_frame_alone() -> None:
    X, y = clean_blobs(n_per_class=30)
    frame = pd.DataFrame({"key": [f"r{i}" for i in range(len(y))], "a": X[:, 0], "b": X[:, 1]})
    frame["label"] = y
    original = frame.copy()
    loaded = LoadedTable(frame=frame, source=None)  # type: ignore[arg-type]
    result = probe_table(
        loaded, "label", id_column="key", settings=FitSettings(kernel="linear", folds=0), rate=0.1
    )
    pd.testing.assert_frame_equal(frame, original)
    assert list(result.flipped_ids) == [f"r{i}" for i in result.flipped_rows]
    data = result.to_dict()
    assert data["caution"] == CAUTION
    assert len(data["flips"]) == result.n_flipped == 9


def test_cli_probe_on_the_demo_prints_the_table_and_the_caution(
    capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    out = tmp_path / "probe.json"
    code = main(
        [
            "probe",
            str(DEMO),
            "--label",
            "grade",
            "--id",
            "lot_id",
            "--kernel",
            "rbf",
            "--C",
            "10",
            "--folds",
            "3",
            "--out",
            str(out),
        ]
    )
    printed = capsys.readouterr().out
    assert code == 0
    assert "planted 90 label flips in 1800 labelled rows" in printed
    assert "top k (= flips, 90)" in printed
    assert "caution:" in printed
    flat = " ".join(printed.split())  # the caution is wrapped across lines
    assert "not the errors already in the data" in flat
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["n_flipped"] == 90
    assert all(f["label"] != f["planted"] for f in data["flips"])
    assert all(f["row_id"].startswith("GC-") for f in data["flips"])


@pytest.mark.parametrize("rate", ["0", "0.5"])
def test_cli_probe_bad_rate_exits_2_with_one_error_line(
    capsys: pytest.CaptureFixture[str], rate: str
) -> None:
    code = main(["probe", str(DEMO), "--label", "grade", "--rate", rate])
    err = capsys.readouterr().err
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1
    assert lines[0].startswith("error: probe rate must be above 0 and below 0.5")


def test_cli_probe_missing_label_column_is_a_reviewer_error(
    capsys: pytest.CaptureFixture[str],
) -> None:
    assert main(["probe", str(DEMO), "--label", "nope"]) == 2
    assert "error: label column 'nope' not found" in capsys.readouterr().err
    assert issubclass(SettingsError, ReviewerError)
