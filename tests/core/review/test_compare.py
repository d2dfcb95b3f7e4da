"""Before against after isolates the edits: "after" uses the baseline's settings.

Data: scikit-learn's bundled breast-cancer table (Wolberg et al., UCI), written to CSV.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer

from reviewer.core.model.fitting import fit_margins
from reviewer.core.review.compare import fit_metrics
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings


@pytest.fixture()
def table(tmp_path: Path) -> Path:
    data = load_breast_cancer(as_frame=True)
    frame = data.data.iloc[:, :8].copy()
    frame["diagnosis"] = np.where(data.target == 1, "benign", "malignant")
    path = tmp_path / "cells.csv"
    frame.to_csv(path, index_label="case")
    return path


def _edit(s: ReviewSession) -> None:
    top = np.argsort(s.latest.rows["rank"].to_numpy() + (s.latest.rows["rank"] == 0) * 10**9)
    s.take_model_label(top[:6])
    s.exclude(top[6:9])


def test_same_settings_after_is_the_latest_fit_and_matches_a_recount(table: Path) -> None:
    settings = FitSettings(kernel="linear", C=1.0, folds=3)
    with ReviewSession.open(table, label="diagnosis", id_column="case") as s:
        s.fit(settings)
        _edit(s)
        s.fit()
        comp = s.comparison()
        assert comp is not None and not comp.settings_changed and s.edits_fit is None
        # Recount: the edited labels, fitted directly with the same settings.
        direct = fit_margins(s.X, s.labels, settings, excluded=s.excluded)
        recount = fit_metrics(direct, s.baseline)
        for name, (_, after) in comp.metrics.items():
            assert after == pytest.approx(recount[name], rel=1e-6, abs=1e-9), name
        assert comp.after_settings.C == comp.before_settings.C == 1.0
        # Changed rows carry the current label and both model's labels.
        assert {"label", "model_label_before", "model_label_after"} <= set(comp.changed_rows)


def test_new_settings_are_shown_beside_the_edits_alone(table: Path) -> None:
    with ReviewSession.open(table, label="diagnosis", id_column="case") as s:
        s.fit(FitSettings(kernel="linear", C=1.0, folds=3))
        _edit(s)
        s.fit(FitSettings(kernel="linear", C=10.0, folds=3))
        comp = s.comparison()
        assert comp is not None and comp.settings_changed
        assert comp.before_settings.C == comp.after_settings.C == 1.0
        assert comp.new_settings is not None and comp.new_settings.C == 10.0
        direct = fit_margins(s.X, s.labels, FitSettings(kernel="linear", C=1.0, folds=3),
                             excluded=s.excluded)  # fmt: skip
        assert comp.metrics["sum of slacks"][1] == pytest.approx(direct.summary.sum_slack)
        assert comp.metrics_new is not None
        assert comp.metrics_new["sum of slacks"] == pytest.approx(s.latest.summary.sum_slack)
        kept = comp.metrics["sum of slacks"][1]
    # The edits-alone fit is saved with the session and comes back on reopening.
    with ReviewSession.open(table) as again:
        comp = again.comparison()
        assert comp is not None and comp.settings_changed
        assert comp.metrics["sum of slacks"][1] == pytest.approx(kept)


def test_auto_resolves_once_for_the_edits_alone_fit(table: Path) -> None:
    with ReviewSession.open(table, label="diagnosis", id_column="case") as s:
        s.fit(FitSettings(kernel="auto", folds=3))
        base = s.baseline.settings
        assert base.kernel != "auto" and base.C is not None
        _edit(s)
        s.fit()  # auto chooses again on the edited labels
        comp = s.comparison()
        assert comp is not None
        assert comp.after_settings.same_fit_as(base)
        if comp.settings_changed:
            assert not comp.new_settings.same_fit_as(base)


def test_a_damaged_saved_fit_is_dropped_with_a_warning(table: Path) -> None:
    import sqlite3

    with ReviewSession.open(table, label="diagnosis", id_column="case") as s:
        s.fit(FitSettings(kernel="linear", C=1.0, folds=3))
        s.confirm([0])
        path = s.session_path
    conn = sqlite3.connect(path)
    conn.execute(
        "UPDATE fit_rows SET data = CAST(substr(data,1,length(data)-8) || zeroblob(8) AS BLOB) "
        "WHERE slot='latest'"
    )
    conn.commit()
    conn.close()
    with ReviewSession.open(table) as s:
        assert s.latest is None and s.baseline is not None
        assert any("latest fit was dropped" in w for w in s.warnings)
        assert s.n_events == 1  # the edit log is intact
        s.fit()
        assert s.latest is not None
