"""`scan` and `probe` on text and vectors, run as a user runs them: --role, --vectors, and
the summary that lists every column with its kind."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parent.parent
FAST = ["--kernel", "linear", "--C", "1"]
N = 80


def run(*args: object) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "reviewer", *map(str, args)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )


def one_line_error(proc: subprocess.CompletedProcess[str], *words: str) -> str:
    assert proc.returncode == 2, (proc.returncode, proc.stderr)
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), proc.stderr
    for word in words:
        assert word in lines[0], (word, lines[0])
    return lines[0]


@pytest.fixture
def tickets(tmp_path: Path) -> Path:
    """Invented support tickets: text, a number, a category, an embedding, a blank column."""
    rng = np.random.default_rng(3)
    team = np.array(["billing", "shipping"])[np.arange(N) % 2]
    words = {
        "billing": "invoice refund charge card payment twice",
        "shipping": "parcel courier late tracking box delivery",
    }
    frame = pd.DataFrame(
        {
            "ticket": [f"T{i:03d}" for i in range(N)],
            "message": [
                " ".join(rng.choice(("hello my order " + words[t]).split(), 7)) for t in team
            ],
            "minutes": rng.integers(1, 90, N),
            "channel": rng.choice(["mail", "phone"], N),
            "code": [str(i % 5) for i in range(N)],
            "blank": [""] * N,
            "team": team,
        }
    )
    frame["emb"] = [rng.normal(size=3) for _ in range(N)]
    path = tmp_path / "tickets.parquet"
    frame.to_parquet(path)
    return path


def test_scan_lists_every_column_with_its_kind(tickets: Path, tmp_path: Path) -> None:
    summary = tmp_path / "summary.json"
    proc = run(
        "scan", tickets, "--label", "team", "--id", "ticket", *FAST,
        "--role", "code=categorical", "--role", "minutes=ignore", "--summary", summary,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    err = proc.stderr
    assert "label: team" in err and "id: ticket" in err
    assert "categorical: channel, code" in err
    assert "vector: emb (3 features)" in err
    assert "text: message (" in err
    assert "ignored: minutes (ignored by choice)" in err
    assert "ignored: blank (no text)" in err
    doc = json.loads(summary.read_text())
    assert doc["columns"] == {
        "channel": "categorical",
        "code": "categorical",
        "message": "text",
        "emb": "vector",
        "minutes": "ignored: ignored by choice",
        "blank": "ignored: no text",
    }
    n_text = int(err.split("text: message (")[1].split(" ")[0].replace(",", ""))
    assert doc["features"] == 2 + 5 + 3 + n_text  # channel x2, code x5, emb x3, the text


def test_role_choices_are_checked(tickets: Path) -> None:
    one_line_error(
        run("scan", tickets, "--label", "team", *FAST, "--role", "minutes"), "COLUMN=KIND"
    )
    one_line_error(
        run("scan", tickets, "--label", "team", *FAST, "--role", "minutes=words"),
        "'minutes'",
        "'words'",
        "numeric, categorical, text, vector, ignore",
    )
    one_line_error(run("scan", tickets, "--label", "team", *FAST, "--role", "nope=text"), "'nope'")


def test_a_vectors_file_is_used_and_checked(tickets: Path, tmp_path: Path) -> None:
    rng = np.random.default_rng(4)
    good = tmp_path / "v.npy"
    np.save(good, rng.normal(size=(N, 5)))
    summary = tmp_path / "s.json"
    proc = run("scan", tickets, "--label", "team", *FAST, "--vectors", good, "--summary", summary)
    assert proc.returncode == 0, proc.stderr
    assert f"vectors: {good} (5 features)" in proc.stderr
    assert json.loads(summary.read_text())["vectors"] == str(good.resolve())
    short = tmp_path / "short.npy"
    np.save(short, rng.normal(size=(N - 1, 5)))
    one_line_error(
        run("scan", tickets, "--label", "team", *FAST, "--vectors", short),
        str(short),
        f"has {N - 1} vectors but the table has {N} rows",
    )
    one_line_error(run("probe", tickets, "--label", "team", *FAST, "--vectors", short), str(short))


def test_probe_takes_roles_and_vectors(tickets: Path, tmp_path: Path) -> None:
    vec = tmp_path / "v.npy"
    np.save(vec, np.random.default_rng(5).normal(size=(N, 2)))
    out = tmp_path / "probe.json"
    proc = run(
        "probe", tickets, "--label", "team", *FAST, "--rate", "0.1",
        "--role", "message=ignore", "--vectors", vec, "--out", out,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert json.loads(out.read_text())["n_flipped"] == 8
