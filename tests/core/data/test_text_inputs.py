"""Text columns at the edges: a table with text only, a column with no text, cells of a
megabyte, and column roles that survive a round trip through the session file."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import sparse

from reviewer.core.data import text
from reviewer.core.data.dataset import prepare_dataset
from reviewer.core.data.loading import table_from_frame
from reviewer.core.data.roles import ColumnRoles, infer_roles
from reviewer.core.errors import InputError
from reviewer.core.model.scan import scan_table
from reviewer.core.values import FitSettings

LINEAR = FitSettings(kernel="linear", C=1.0, folds=5, seed=0, solver="exact")
TOPICS = {
    "plumber": "leak pipe drain tap water valve washer flood sink",
    "electrician": "socket fuse breaker wiring light switch power spark outlet",
}


def work_orders(n: int, seed: int = 0) -> pd.DataFrame:
    """Invented maintenance requests: a few topic words among common ones."""
    rng = np.random.default_rng(seed)
    common = "please the room in floor second today again urgent since morning check".split()
    trades = np.array(list(TOPICS))[np.arange(n) % 2]
    notes = []
    for trade in trades:
        words = list(rng.choice(common, 8)) + list(rng.choice(TOPICS[trade].split(), 3))
        rng.shuffle(words)
        notes.append(" ".join(words))
    return pd.DataFrame({"request": notes, "trade": trades})


def test_a_table_whose_only_feature_is_text_is_ranked() -> None:
    frame = work_orders(60)
    frame.loc[10, "request"] = "water leak under the sink, the drain pipe and tap drip"
    frame.loc[10, "trade"] = "electrician"  # a plumbing job sent to the wrong trade
    outcome = scan_table(table_from_frame(frame), "trade", settings=LINEAR)
    assert outcome.roles.text == ["request"] and outcome.roles.numeric == []
    table = outcome.table
    assert table["rank"].notna().all()
    assert table.loc[10, "rank"] == 1
    assert table.loc[10, "model_label"] == "plumber"


def test_a_column_with_no_text_is_ignored_with_its_reason() -> None:
    frame = work_orders(30)
    frame["remarks"] = ["   "] * 30  # blank cells, as a spreadsheet export leaves them
    frame["empty"] = [None] * 30
    roles = infer_roles(frame, "trade", overrides={"empty": "text"})
    assert roles.ignored["remarks"] == "no text"
    assert roles.ignored["empty"] == "no text"  # chosen as text, but holds none
    assert roles.text == ["request"]


def test_missing_text_reads_as_empty() -> None:
    frame = work_orders(30)
    frame.loc[[2, 5], "request"] = None
    data = prepare_dataset(table_from_frame(frame), label="trade")
    assert data.X[[2, 5]].nnz == 0  # no terms, no features: the row sits at the origin


def test_text_that_gives_no_repeated_term_is_refused_when_it_is_all_there_is() -> None:
    frame = pd.DataFrame(
        # Two-letter words, each in one row: no word or character n-gram repeats.
        {"note": [chr(97 + i) + chr(98 + i) for i in range(24)], "label": ["a", "b"] * 12}
    )
    with pytest.raises(
        InputError,
        match=r"'note' give no word or character n-gram found in "
        r"two or more rows",
    ):
        prepare_dataset(table_from_frame(frame), label="label", overrides={"note": "text"})


def test_megabyte_cells_use_their_first_characters_with_a_note() -> None:
    frame = work_orders(40)
    filler = "valve " * (1_000_000 // 6)
    for row in (0, 3):  # two cells of a megabyte, each with a word past the cut
        frame.loc[row, "request"] = filler + " zyzzyva zyzzyva"
    frame.loc[5, "request"] = "zyzzyva zyzzyva"
    frame.loc[7, "request"] = "zyzzyva"
    outcome = scan_table(table_from_frame(frame), "trade", settings=LINEAR)
    notes = " ".join(outcome.fit.summary.notes)
    assert "text column 'request': 2 cell(s) longer than 100,000 characters" in notes
    assert f"their features use the first {text.MAX_TEXT_CHARS:,}" in notes
    # The word after the cut counts only in the short rows: two rows, so it is a feature...
    assert "request::w:zyzzyva" in outcome.feature_names
    data = prepare_dataset(table_from_frame(frame), label="trade")
    col = data.feature_names.index("request::w:zyzzyva")
    # ...and the megabyte rows do not have it.
    assert set(data.X[:, col].nonzero()[0]) == {5, 7}


def test_terms_repeated_past_a_byte_or_two_keep_scikit_learns_tfidf() -> None:
    # Counts are stored in one byte while they fit, else two, else four: a term repeated
    # 300 times in a cell and one repeated about 100,000 times must not wrap around.
    frame = work_orders(40)
    frame.loc[0, "request"] = "leak " * 300
    frame.loc[1, "request"] = "a" * 99_999  # char 3-gram 'aaa' 99,997 times
    frame.loc[2, "request"] = "aaaa leak"
    data = prepare_dataset(table_from_frame(frame), label="trade")
    docs = text.documents(frame["request"])
    # Reference: scikit-learn's TfidfVectorizer with our documented settings.
    blocks = [vec.fit_transform(docs) for _, vec in text.tfidf_vectorizers()]
    expected = sparse.hstack(blocks, format="csr")
    assert data.X.shape == expected.shape
    assert abs(data.X - expected).max() < 1e-12
    col = data.feature_names.index("request::c:aaa")
    assert data.X[1, col] > 0.5  # most of the long cell's weight


def test_roles_round_trip_and_older_role_dicts_still_load() -> None:
    roles = ColumnRoles(
        label="y",
        id="k",
        numeric=["a"],
        categorical=["b"],
        ignored={"c": "no text"},
        text=["t"],
        vector=["v"],
    )
    assert ColumnRoles.from_dict(roles.to_dict()) == roles
    assert roles.features == ["a", "b", "t", "v"]
    older = {"label": "y", "id": None, "numeric": ["a"], "categorical": [], "ignored": {}}
    loaded = ColumnRoles.from_dict(older)
    assert loaded.text == [] and loaded.vector == [] and loaded.features == ["a"]
