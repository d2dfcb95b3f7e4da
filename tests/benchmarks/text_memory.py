"""Peak memory and time of scanning a large text table with the linear kernel.

Writes a CSV of N rows with one free-text column of about 50 words per row (words drawn
from a seeded invented vocabulary of 20,000 words with Zipf-like frequencies; each of the
three classes uses its own 300 topic words more often) and a label, then runs
``margin-reviewer scan --kernel linear`` on it in a child process and reads the child's
peak resident memory (``ru_maxrss`` from ``os.wait4``). Budget: 4 GB at 200,000 rows.

    python tests/benchmarks/text_memory.py            # 200,000 rows
    python tests/benchmarks/text_memory.py --smoke --out-dir /tmp/x   # 5,000 rows
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
RESULTS = Path(__file__).resolve().parent / "results"
BUDGET_GB = 4.0
WORDS_PER_ROW = 50
VOCABULARY = 20_000
TOPIC_WORDS = 300
CLASSES = ("billing", "delivery", "product")


def invented_words(n: int, rng: np.random.Generator) -> np.ndarray:
    """Pronounceable invented words of 3-10 letters (consonant-vowel syllables)."""
    consonants = np.array(list("bcdfghjklmnprstvz"))
    vowels = np.array(list("aeiou"))
    words: set[str] = set()
    while len(words) < n:
        syllables = rng.integers(2, 5)
        words.add(
            "".join(rng.choice(consonants) + rng.choice(vowels) for _ in range(syllables))[
                : rng.integers(3, 11)
            ]
        )
    return np.array(sorted(words))


def write_csv(path: Path, n_rows: int, seed: int = 0) -> None:
    import pandas as pd

    rng = np.random.default_rng(seed)
    vocab = invented_words(VOCABULARY, rng)
    base = 1.0 / np.arange(1, VOCABULARY + 1) ** 1.05
    base /= base.sum()
    topics = [rng.choice(VOCABULARY, TOPIC_WORDS, replace=False) for _ in CLASSES]
    block = 20_000
    with open(path, "w", encoding="utf-8", newline="") as handle:
        for start in range(0, n_rows, block):
            m = min(block, n_rows - start)
            labels = rng.integers(0, len(CLASSES), m)
            common = rng.choice(VOCABULARY, size=(m, WORDS_PER_ROW), p=base)
            topical = np.stack([rng.choice(topics[k], WORDS_PER_ROW) for k in labels])
            use_topic = rng.random((m, WORDS_PER_ROW)) < 0.15
            ids = np.where(use_topic, topical, common)
            texts = [" ".join(vocab[row]) for row in ids]
            frame = pd.DataFrame({"ticket": np.arange(start, start + m), "message": texts}).assign(
                team=np.array(CLASSES)[labels]
            )
            frame.to_csv(handle, index=False, header=start == 0)


def run_scan(data: Path, work: Path) -> dict:
    out, summary = work / "ranked.csv", work / "summary.json"
    cmd = [
        sys.executable,
        "-m",
        "reviewer",
        "scan",
        str(data),
        "--label",
        "team",
        "--id",
        "ticket",
        "--kernel",
        "linear",
        "--C",
        "1",
        "--quiet",
        "--out",
        str(out),
        "--summary",
        str(summary),
    ]
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    started = time.perf_counter()
    proc = subprocess.Popen(cmd, env=env, stderr=subprocess.PIPE, cwd=ROOT)
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - started
    err = proc.stderr.read().decode() if proc.stderr else ""
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        raise SystemExit(f"scan failed ({code}): {err.strip()[-2000:]}")
    doc = json.loads(summary.read_text())
    return {
        "peak_gb": round(usage.ru_maxrss * 1024 / 1e9, 3),  # ru_maxrss is in KiB on Linux
        "seconds": round(seconds, 1),
        "features": doc["features"],
        "nonzeros": doc["feature_nonzeros"],
        "heldout_accuracy": doc["heldout_accuracy"],
        "notes": doc["notes"],
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--smoke", action="store_true", help="5,000 rows, a quick check")
    parser.add_argument("--rows", type=int, default=None)
    parser.add_argument("--out-dir", type=Path, default=RESULTS)
    args = parser.parse_args(argv)
    rows = args.rows or (5_000 if args.smoke else 200_000)
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        data = work / "tickets.csv"
        t0 = time.perf_counter()
        write_csv(data, rows)
        write_seconds = time.perf_counter() - t0
        result = run_scan(data, work)
        file_mb = data.stat().st_size / 1e6
    from reviewer.core.data import text

    result.update(
        rows=rows,
        words_per_row=WORDS_PER_ROW,
        file_mb=round(file_mb, 1),
        write_seconds=round(write_seconds, 1),
        budget_gb=BUDGET_GB,
        within_budget=result["peak_gb"] <= BUDGET_GB,
        caps={
            "min_df": text.MIN_DF,
            "max_word_features": text.MAX_WORD_FEATURES,
            "max_char_features": text.MAX_CHAR_FEATURES,
        },
        machine=f"{platform.system()} {platform.machine()}, {os.cpu_count()} cpus",
    )
    args.out_dir.mkdir(parents=True, exist_ok=True)
    (args.out_dir / "text_memory.json").write_text(json.dumps(result, indent=1) + "\n")
    lines = [
        "# Scanning a text table: peak memory and time",
        "",
        f"`margin-reviewer scan --kernel linear --C 1` (5 held-out folds) on {rows:,} rows "
        f"of about {WORDS_PER_ROW} invented words each ({file_mb:.1f} MB CSV), in a child "
        f"process; peak resident memory from `os.wait4`. Budget {BUDGET_GB:g} GB.",
        "",
        "| rows | features (vocabulary) | non-zeros | peak GB | seconds | held-out accuracy |",
        "|---:|---:|---:|---:|---:|---:|",
        f"| {rows:,} | {result['features']:,} | {result['nonzeros']:,} | "
        f"{result['peak_gb']:.2f} | {result['seconds']:.0f} | "
        f"{result['heldout_accuracy']:.3f} |",
        "",
        f"Vocabulary caps: word 1-2-grams {text.MAX_WORD_FEATURES:,}, character 3-5-grams "
        f"{text.MAX_CHAR_FEATURES:,}, each in at least {text.MIN_DF} rows. "
        f"Machine: {result['machine']}.",
        *[f"Note from the scan: {n}" for n in result["notes"]],
        "",
    ]
    (args.out_dir / "text_memory.md").write_text("\n".join(lines))
    print("\n".join(lines))
    if not result["within_budget"] and not args.smoke:
        print(f"over budget: {result['peak_gb']:.2f} GB > {BUDGET_GB:g} GB", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
