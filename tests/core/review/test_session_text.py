"""A review session on text and vectors: the fits hold text vocabularies per held-out fold,
the roles and the vectors file are remembered, and a changed vectors file is refused."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import sparse

from reviewer.core.errors import SessionError, SourceChangedError
from reviewer.core.review.session import ReviewSession
from reviewer.core.review.sessionfile import SessionFile
from reviewer.core.values import FitSettings

QUICK = FitSettings(kernel="linear", C=1.0, folds=3, solver="exact")
N = 60


@pytest.fixture
def data(tmp_path: Path) -> Path:
    rng = np.random.default_rng(8)
    team = np.array(["billing", "shipping"])[np.arange(N) % 2]
    words = {"billing": "invoice refund charge card", "shipping": "parcel courier late box"}
    frame = pd.DataFrame(
        {
            "ticket": [f"T{i:02d}" for i in range(N)],
            "message": [" ".join(rng.choice(("my order " + words[t]).split(), 6)) for t in team],
            "team": team,
        }
    )
    path = tmp_path / "tickets.csv"
    frame.to_csv(path, index=False)
    np.save(tmp_path / "emb.npy", rng.normal(size=(N, 4)))
    return path


def test_a_text_session_fits_with_per_fold_vocabularies_and_resumes(data: Path) -> None:
    vectors = data.with_name("emb.npy")
    with ReviewSession.open(data, label="team", id_column="ticket", vectors=vectors) as s:
        assert s.roles.text == ["message"]
        assert sparse.issparse(s.X)
        assert s.feature_names[-1].startswith("message::c:")
        assert "vectors[3]" in s.feature_names
        job = s.prepare_fit(QUICK)
        assert job.fold_features is not None  # held-out folds rebuild the text features
        fit = s.fit(QUICK)
        assert fit.rows["heldout_margin"].notna().all()
        s.relabel([0], "shipping")
    with SessionFile.open(data.with_name("tickets.csv.review.sqlite"), read_only=True) as f:
        meta = f.meta
    assert meta["roles"]["text"] == ["message"]
    assert meta["vectors"]["path"] == str(vectors.resolve())
    # Reopened without naming the vectors file: the remembered one is loaded again.
    with ReviewSession.open(data) as again:
        assert again.feature_names == s.feature_names
        assert again.labels[0] == "shipping"


def test_a_changed_or_missing_vectors_file_is_refused(data: Path) -> None:
    vectors = data.with_name("emb.npy")
    ReviewSession.open(data, label="team", vectors=vectors).close()
    np.save(vectors, np.zeros((N, 4)))
    with pytest.raises(SourceChangedError, match=r"emb.npy changed since session .* began"):
        ReviewSession.open(data)
    other = data.with_name("other.npy")
    np.save(other, np.ones((N, 4)))
    with pytest.raises(SourceChangedError, match=r"other.npy differs from the one session"):
        ReviewSession.open(data, vectors=other)
    vectors.unlink()
    with pytest.raises(SessionError, match=r"emb.npy, which is not there any more"):
        ReviewSession.open(data)


def test_vectors_cannot_join_a_session_begun_without_them(data: Path) -> None:
    ReviewSession.open(data, label="team").close()
    with pytest.raises(SessionError, match="began without a vectors file"):
        ReviewSession.open(data, vectors=data.with_name("emb.npy"))
