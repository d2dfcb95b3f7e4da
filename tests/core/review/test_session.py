"""The review session as the window and the command line use it: edits, fits, reopen,
source-changed handling, single writer, and export through the session."""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reviewer.core.errors import InputError, SessionError, SessionLockedError, SourceChangedError
from reviewer.core.review.session import ReviewSession
from reviewer.core.values import FitSettings

ROOT = Path(__file__).resolve().parents[3]
DEMO = ROOT / "reviewer" / "demo_data" / "coffee_lots.csv"
QUICK = FitSettings(kernel="linear", C=1.0, folds=3)


@pytest.fixture
def data(tmp_path: Path) -> Path:
    # A 300-row slice keeps fits quick; the session must treat it like any user file.
    frame = pd.read_csv(DEMO, nrows=300)
    path = tmp_path / "lots.csv"
    frame.to_csv(path, index=False)
    return path


def open_session(path: Path, **kw) -> ReviewSession:
    return ReviewSession.open(path, label="grade", id_column="lot_id", **kw)


def test_edits_fit_and_reopen_resume_where_the_reviewer_left_off(data: Path) -> None:
    with open_session(data) as s:
        fit = s.fit(QUICK)
        worst = fit.rows.sort_values("rank").index[:4].tolist()
        other = next(c for c in s.classes if c != s.labels[worst[0]])
        s.relabel([worst[0]], other, reason="label looks wrong")
        s.confirm([worst[1]])
        s.exclude(worst[2:4])
        labels, excluded, review = s.labels.copy(), s.excluded.copy(), s.review.copy()
        assert not s.fit_is_current  # edits after the fit make it stale
        assert s.session_path == data.with_name("lots.csv.review.sqlite")
    with open_session(data) as again:
        assert list(again.labels) == list(labels)
        assert np.array_equal(again.excluded, excluded)
        assert np.array_equal(again.review, review)
        # The latest fit comes back from the file without refitting.
        assert again.latest is not None
        assert np.allclose(again.latest.rows["slack"], fit.rows["slack"])


def test_bulk_exclude_is_one_undo_step_and_undo_redo_are_in_the_log(data: Path) -> None:
    with open_session(data) as s:
        s.exclude([5, 6, 7])
        assert s.excluded[[5, 6, 7]].all()
        s.undo()
        assert not s.excluded[[5, 6, 7]].any()
        s.redo()
        assert s.excluded[[5, 6, 7]].all()
        actions = [e.action for e in s.events()]
        assert actions == ["exclude", "undo", "redo"]
        assert [e.action for e in s.row_history(6)] == ["exclude", "undo", "redo"]


def test_an_edit_records_the_rows_slack_and_zone_at_that_moment(data: Path) -> None:
    with open_session(data) as s:
        fit = s.fit(QUICK)
        row = int(fit.rows["rank"].idxmin())
        event = s.confirm([row], reason="checked against the original record")
        assert event.slack[0] == pytest.approx(fit.rows.at[row, "slack"])
        assert event.zone[0] == fit.rows.at[row, "zone"]
        assert event.row_ids == (str(s.ids[row]),)
        assert event.time.endswith("Z") and "T" in event.time  # ISO 8601, UTC


def test_changed_source_is_refused_with_both_ways_on(data: Path) -> None:
    with open_session(data) as s:
        s.relabel([0], "exchange")
        first_id = s.ids[0]
    frame = pd.read_csv(data)
    # Reorder and drop a row: positions no longer match, ids still do.
    changed = pd.concat([frame.iloc[1:].iloc[::-1], frame.iloc[:0]])
    changed = changed[changed["lot_id"] != frame.at[5, "lot_id"]]
    changed = pd.concat([frame.iloc[[0]], changed])
    changed.to_csv(data, index=False)
    with pytest.raises(SourceChangedError, match="changed"):
        open_session(data)
    with open_session(data, read_only=True) as look:
        assert look.read_only
        with pytest.raises(SessionError, match="read-only"):
            look.confirm([1])
    with open_session(data, reattach=True) as back:
        row = int(np.flatnonzero(back.ids == first_id)[0])
        assert back.labels[row] == "exchange"
        back.confirm([row])  # writable again after re-attaching
    with open_session(data) as normal:  # the new fingerprint is recorded
        assert normal.labels[row] == "exchange"


def test_a_second_writer_is_refused_but_a_reader_may_look(data: Path) -> None:
    with open_session(data):
        with pytest.raises(SessionLockedError):
            open_session(data)
        with open_session(data, read_only=True) as reader:
            assert reader.read_only


def test_export_through_the_session_changes_only_labels(data: Path, tmp_path: Path) -> None:
    with open_session(data) as s:
        s.relabel([3], "specialty" if s.labels[3] != "specialty" else "premium")
        s.exclude([10])
        out = tmp_path / "clean.csv"
        audit = tmp_path / "audit.csv"
        report = tmp_path / "summary.html"
        written = s.export(out, audit=audit, report=report)
        names = ["clean.csv", "audit.csv", "summary.html", "clean.csv.manifest.json"]
        assert [p.name for p in written] == names
        with pytest.raises(Exception, match=r"source|data file"):
            s.export(data, overwrite=True)
    source = pd.read_csv(data, dtype=str, keep_default_na=False)
    clean = pd.read_csv(out, dtype=str, keep_default_na=False)
    expected = source.drop(index=10).reset_index(drop=True)
    assert len(clean) == len(source) - 1
    assert (clean.drop(columns="grade") == expected.drop(columns="grade")).all().all()
    assert (clean["grade"] != expected["grade"]).sum() == 1
    assert len(pd.read_csv(audit)) == 2  # one line per event
    assert "SHA-256" in report.read_text(encoding="utf-8")


def test_cli_export_writes_the_cleaned_file(data: Path, tmp_path: Path) -> None:
    with open_session(data) as s:
        s.exclude([0, 1])
        session_file = s.session_path
    out = tmp_path / "out.csv"
    proc = subprocess.run(
        [sys.executable, "-m", "reviewer", "export", str(session_file), "--out", str(out)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert len(pd.read_csv(out)) == 298
    again = subprocess.run(
        [sys.executable, "-m", "reviewer", "export", str(session_file), "--out", str(out)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert again.returncode == 2
    assert again.stderr.startswith("error:") and len(again.stderr.strip().splitlines()) == 1


def test_session_falls_back_to_the_user_folder_when_the_data_folder_is_read_only(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from reviewer.core.review import session as session_module

    data = tmp_path / "ro" / "lots.csv"
    data.parent.mkdir()
    shutil.copy(DEMO, data)
    # Running as root makes chmod moot, so the folder's writability is what we simulate.
    real_access = session_module.os.access
    monkeypatch.setattr(
        session_module.os,
        "access",
        lambda p, mode: False if Path(p) == data.parent else real_access(p, mode),
    )
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    path = session_module.default_session_path(data, "ab" * 32)
    assert data.parent not in path.parents
    assert path.name.endswith(".review.sqlite")


def test_a_workbook_sheet_is_chosen_and_remembered(tmp_path: Path) -> None:
    import pandas as pd

    book = tmp_path / "lots.xlsx"
    lots = pd.read_csv(DEMO).head(120)
    with pd.ExcelWriter(book) as writer:
        pd.DataFrame({"about": ["harvest notes"]}).to_excel(writer, sheet_name="Notes", index=False)
        lots.to_excel(writer, sheet_name="Lots", index=False)
    preview = ReviewSession.preview(book, sheet="Lots")
    assert preview.source.sheets == ("Notes", "Lots") and "grade" in preview.columns
    with ReviewSession.open(book, label="grade", id_column="lot_id", sheet="Lots") as s:
        assert s.n_rows == 120
        s.confirm([0])
    # Reopened without naming the sheet, the session reads the sheet it reviews.
    with ReviewSession.open(book) as s:
        assert s.loaded.source.sheet == "Lots" and s.n_events == 1
    with pytest.raises(SessionError, match="reviews sheet 'Lots', not 'Notes'"):
        ReviewSession.open(book, sheet="Notes")


def test_rows_are_checked_and_ids_can_name_them(tmp_path: Path) -> None:
    data = tmp_path / "lots.csv"
    shutil.copy(DEMO, data)
    with ReviewSession.open(data, label="grade", id_column="lot_id") as s:
        s.confirm(5)  # one position
        s.confirm(np.array([6, 7]))  # numpy positions
        assert s.n_events == 2
        for bad in ("GC-2026-00201", [1.5], [True], 3.0):
            with pytest.raises(SessionError, match="argument 'rows'"):
                s.confirm(bad)
        rows = s.rows_of(["GC-2026-00201"])
        assert s.ids[rows[0]] == "GC-2026-00201"
        with pytest.raises(InputError, match="no row has id nope"):
            s.rows_of("nope")
        # Relabelling to the label a row already has is not a relabel.
        current = s.labels[rows[0]]
        with pytest.raises(SessionError, match="already have label"):
            s.relabel(rows, current)
        other = next(c for c in s.classes if c != current)
        event = s.relabel([rows[0], 9], other)
        assert all(b != other for b in event.before)  # only rows that change are logged


def test_the_ranking_has_the_scan_columns(tmp_path: Path) -> None:
    data = tmp_path / "lots.csv"
    shutil.copy(DEMO, data)
    with ReviewSession.open(data, label="grade", id_column="lot_id") as s:
        s.fit(FitSettings(kernel="linear", C=1.0, folds=3))
        table = s.ranking()
        assert list(table.columns)[:3] == ["row_id", "label", "model_label"]
        assert table.sort_values("rank")["row_id"].iloc[0] == s.ids[s.latest.rows["rank"].idxmin()]
