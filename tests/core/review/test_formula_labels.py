"""Labels that a spreadsheet would run as formulas (OWASP CSV injection) are kept exactly,
and the reviewer is warned once."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from reviewer.core.data.loading import load_table
from reviewer.core.model.scan import scan_table
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings, looks_like_formula


def test_what_counts_as_a_formula() -> None:
    # OWASP's list of leading characters; plain signed numbers are numbers to a spreadsheet.
    for text in ("=1+1", "+cmd", "-2+3", "@SUM(A1)", "\tx", "\rx"):
        assert looks_like_formula(text), text
    for text in ("-1.5", "+3", "1e-4", "grade A", ""):
        assert not looks_like_formula(text), text


def _table(tmp_path: Path) -> Path:
    rng = np.random.default_rng(0)
    n = 60
    frame = pd.DataFrame(
        {
            "x": np.r_[rng.normal(-1, 1, n // 2), rng.normal(1, 1, n // 2)],
            "label": ["=HYPERLINK(1)"] * (n // 2) + ["b"] * (n // 2),
        }
    )
    path = tmp_path / "d.csv"
    frame.to_csv(path, index=False)
    return path


def test_scan_and_session_warn_about_formula_labels_and_keep_them(tmp_path: Path) -> None:
    path = _table(tmp_path)
    out = scan_table(load_table(path), "label", settings=FitSettings(kernel="linear", C=1))
    assert any("begin like a spreadsheet formula" in n for n in out.fit.summary.notes)
    assert set(out.table["label"]) == {"=HYPERLINK(1)", "b"}
    with ReviewSession.open(path, label="label") as s:
        assert sum("spreadsheet formula" in w for w in s.warnings) == 1


def test_a_formula_relabel_warns_once(tmp_path: Path) -> None:
    path = tmp_path / "clean.csv"
    pd.DataFrame({"x": np.arange(40.0), "label": ["a", "b"] * 20}).to_csv(path, index=False)
    heard: list[str] = []
    with ReviewSession.open(path, label="label") as s:
        s.subscribe(lambda kind, payload: heard.append(payload) if kind == "warning" else None)
        s.relabel([0], "=2*3")
        s.relabel([1], "+evil")
        s.relabel([2], "c")
        assert len(heard) == 1 and "'=2*3'" in heard[0]
        assert s.labels[0] == "=2*3"
