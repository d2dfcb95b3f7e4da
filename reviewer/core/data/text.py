"""Free-text columns as TF-IDF features, fitted on the rows a model is fitted on.

Each text column gets two vectorisers, as scikit-learn's ``TfidfVectorizer`` would build
them with the settings below: word 1-2-grams and character 3-5-grams within word
boundaries (``analyzer="char_wb"``), sublinear tf (1 + log count), smooth idf, each row
scaled to unit length per vectoriser. Missing text reads as the empty string.

The text is read once: a term-count matrix over every row (terms in two or more rows
only, which no fold could keep anyway). The TF-IDF of any set of training rows is then
computed from those counts exactly as ``TfidfVectorizer.fit`` on those rows alone would
compute it (vocabulary of terms in at least ``MIN_DF`` training rows, the
``MAX_FEATURES`` most frequent of them, idf from the training rows), so a held-out fold
never sees the other folds' vocabulary or idf (tests/core/data/test_text.py compares with
``cross_val_predict`` over a ``ColumnTransformer`` of ``TfidfVectorizer`` s). Reading the
text once instead of once per fold makes a 5-fold scan about 6 times cheaper in
tokenising, the larger part of the work on text (tests/benchmarks/text_memory.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import sparse
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.preprocessing import normalize

WORD_NGRAMS = (1, 2)
CHAR_NGRAMS = (3, 5)
MIN_DF = 2
"""A term must appear in at least this many training rows to be a feature."""
MAX_WORD_FEATURES = 100_000
MAX_CHAR_FEATURES = 100_000
"""Vocabulary caps per text column and vectoriser: the most frequent terms are kept (the
cap bounds the model's width; the rows' non-zeros, and so memory, depend mostly on the
text's length). Chosen with tests/benchmarks/text_memory.py."""

MAX_TEXT_CHARS = 100_000
"""Only the first this-many characters of a cell become features. Tokenising costs about
6 s per MB of text on a laptop core (character n-grams are most of it): 20 cells of 1 MB
took 122 s and 0.95 GB for a 5-fold linear scan without this cap, about a tenth of that
with it. The window still shows the whole cell."""

ANALYZERS = (
    # (tag in feature names, analyzer, n-gram range, cap)
    ("w", "word", WORD_NGRAMS, MAX_WORD_FEATURES),
    ("c", "char_wb", CHAR_NGRAMS, MAX_CHAR_FEATURES),
)


def tfidf_vectorizers() -> list[tuple[str, TfidfVectorizer]]:
    """The two vectorisers of one text column, as scikit-learn objects (tag, vectoriser):
    the definition the count-based path below reproduces."""
    return [
        (
            tag,
            TfidfVectorizer(
                analyzer=analyzer,
                ngram_range=ngrams,
                sublinear_tf=True,
                min_df=MIN_DF,
                max_features=cap,
                dtype=np.float64,
            ),
        )
        for tag, analyzer, ngrams, cap in ANALYZERS
    ]


def documents(values: pd.Series, limit: int | None = MAX_TEXT_CHARS) -> list[str]:
    """A text column as the strings the vectorisers read: missing values become "", and
    each cell is cut to its first ``limit`` characters."""
    out = values.astype(object).where(values.notna(), "")
    docs = [v if isinstance(v, str) else str(v) for v in out.tolist()]
    return docs if limit is None else [d[:limit] for d in docs]


def long_cells_note(frame: pd.DataFrame, columns: list[str]) -> list[str]:
    """A note per text column with cells longer than MAX_TEXT_CHARS."""
    notes = []
    for col in columns:
        lengths = frame[col].astype(object).where(frame[col].notna(), "").astype(str).str.len()
        n = int((lengths > MAX_TEXT_CHARS).sum())
        if n:
            notes.append(
                f"text column {col!r}: {n:,} cell(s) longer than {MAX_TEXT_CHARS:,} characters "
                f"(the longest {int(lengths.max()):,}); their features use the first "
                f"{MAX_TEXT_CHARS:,}"
            )
    return notes


@dataclass
class TextCounts:
    """Term counts of one text column under one vectoriser, over every row of the table."""

    column: str
    tag: str  # "w" (word n-grams) or "c" (character n-grams)
    counts: sparse.csr_matrix  # (rows, terms) counts (compact_counts); terms in >= MIN_DF rows
    terms: np.ndarray  # the terms, sorted as scikit-learn sorts its vocabulary
    max_features: int
    min_df: int = MIN_DF

    @classmethod
    def read(
        cls, column: str, values: pd.Series, tag: str, analyzer: str, ngrams: tuple, cap: int
    ) -> TextCounts:
        vectorizer = CountVectorizer(
            analyzer=analyzer, ngram_range=ngrams, min_df=MIN_DF, dtype=np.float32
        )
        docs = documents(values)
        try:
            counts = vectorizer.fit_transform(docs).tocsr()
            terms = vectorizer.get_feature_names_out().astype(object)
        except ValueError:  # no term appears in two rows: this vectoriser adds nothing
            counts = sparse.csr_matrix((len(docs), 0), dtype=np.float32)
            terms = np.array([], dtype=object)
        return cls(column, tag, compact_counts(counts), terms, cap)

    def vocabulary(self, train: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """(kept term positions, their idf) learned from the ``train`` rows (all if None),
        as ``TfidfVectorizer.fit`` on those rows: terms in at least ``min_df`` of them, the
        ``max_features`` largest total counts (scikit-learn's own ordering and ties), idf
        ln((1 + n) / (1 + df)) + 1."""
        n_terms = self.counts.shape[1]
        rows = np.arange(self.counts.shape[0]) if train is None else np.asarray(train)
        df = np.zeros(n_terms, dtype=np.int64)
        tfs = np.zeros(n_terms, dtype=np.float64)
        for chunk in row_chunks(rows):  # in slices, so no copy of the whole count matrix
            C = self.counts[chunk]
            df += np.bincount(C.indices, minlength=n_terms)
            tfs += np.bincount(C.indices, weights=C.data, minlength=n_terms)
        mask = df >= self.min_df
        if mask.sum() > self.max_features:
            order = (-tfs[mask]).argsort()[: self.max_features]
            limited = np.zeros(n_terms, dtype=bool)
            limited[np.flatnonzero(mask)[order]] = True
            mask = limited
        keep = np.flatnonzero(mask)
        idf = np.log((len(rows) + 1) / (df[keep] + 1.0)) + 1.0
        return keep, idf

    def tfidf(
        self, rows: np.ndarray | None, keep: np.ndarray, idf: np.ndarray
    ) -> sparse.csr_matrix:
        """TF-IDF of ``rows`` (all if None) over the vocabulary ``keep``: 1 + log count,
        times idf, each row scaled to unit length."""
        C = self.counts if rows is None else self.counts[rows]
        if len(keep) == 0:
            return sparse.csr_matrix((C.shape[0], 0), dtype=np.float64)
        X = C[:, keep].astype(np.float64)
        X.sort_indices()
        np.log(X.data, out=X.data)
        X.data += 1.0
        X.data *= idf[X.indices]
        return normalize(X, norm="l2", copy=False)

    def kept_per_row(self, rows: np.ndarray, keep: np.ndarray) -> np.ndarray:
        """How many of the ``keep`` terms each of ``rows`` holds (its non-zeros)."""
        mask = np.zeros(self.counts.shape[1], dtype=bool)
        mask[keep] = True
        C = self.counts[rows]
        hits = np.concatenate([[0], np.cumsum(mask[C.indices], dtype=np.int64)])
        out: np.ndarray = hits[C.indptr[1:]] - hits[C.indptr[:-1]]
        return out

    def names(self, keep: np.ndarray) -> list[str]:
        return [f"{self.column}::{self.tag}:{t}" for t in self.terms[keep]]


def compact_counts(counts: sparse.csr_matrix) -> sparse.csr_matrix:
    """The counts in the smallest unsigned integer type that holds them exactly (uint8 for
    rows of ordinary length, uint16 up to 65,535 repeats of a term in one cell), else as
    they are (float32). A stored count then takes 1 or 2 bytes instead of 4: on a
    200,000-row table of 50 words a row, 0.34 GB less held for the whole scan."""
    if counts.nnz == 0:
        return counts
    top = float(counts.data.max())
    for kind in (np.uint8, np.uint16):
        if top <= np.iinfo(kind).max:
            return sparse.csr_matrix(
                (counts.data.astype(kind), counts.indices, counts.indptr), shape=counts.shape
            )
    return counts


CHUNK_ROWS = 5_000
"""Rows handled at a time when building matrices, so no step copies a whole matrix."""


def row_chunks(rows: np.ndarray, size: int | None = None) -> list[np.ndarray]:
    size = size or CHUNK_ROWS
    return [rows[i : i + size] for i in range(0, len(rows), size)] or [rows[:0]]


def read_text_columns(frame: pd.DataFrame, columns: list[str]) -> list[TextCounts]:
    """The term counts of every text column under both vectorisers."""
    return [
        TextCounts.read(col, frame[col], tag, analyzer, ngrams, cap)
        for col in columns
        for tag, analyzer, ngrams, cap in ANALYZERS
    ]
