"""Speed of the edit log: replaying a long log, loading it from the session file, one commit.

    python tests/benchmarks/replay.py            # 100,000 events over 100,000 rows
    python tests/benchmarks/replay.py --smoke    # tiny run for CI

Writes results/replay.md and replay.json (replay_smoke.* in smoke mode).
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import os
import platform
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from reviewer.core.review.editlog import Event, LabelState  # noqa: E402
from reviewer.core.review.sessionfile import SessionFile  # noqa: E402

CLASSES = np.array(["setosa-like", "versicolor-like", "virginica-like", "other"], dtype=object)


def make_log(n_rows: int, n_events: int, seed: int) -> tuple[np.ndarray, list[Event]]:
    """A plausible review log: mostly single-row decisions, some bulk edits, undo and redo."""
    rng = np.random.default_rng(seed)
    source = CLASSES[rng.integers(0, 3, n_rows)]
    state = LabelState(source)
    events: list[Event] = []
    rolls = rng.random(n_events)
    for i, roll in enumerate(rolls, start=1):
        if roll < 0.06 and state.can_undo:
            ev = state.make_undo(reviewer="bench", time="2026-01-01T00:00:00.000Z")
        elif roll < 0.09 and state.can_redo:
            ev = state.make_redo(reviewer="bench", time="2026-01-01T00:00:00.000Z")
        else:
            bulk = roll > 0.995
            size = int(rng.integers(20, 500)) if bulk else 1
            rows = rng.choice(n_rows, size=size, replace=False).tolist()
            action = ("relabel", "confirm", "exclude", "restore", "note")[int(rng.integers(0, 5))]
            ev = state.make_edit(
                action,
                rows,
                reviewer="bench",
                label=CLASSES[int(rng.integers(0, 4))],
                slack=[1.5] * size,
                zone=["wrong_side"] * size,
                time="2026-01-01T00:00:00.000Z",
            )
        ev = dataclasses.replace(ev, seq=i)
        state.apply(ev)
        events.append(ev)
    return source, events


def _load() -> float | None:
    try:
        return round(os.getloadavg()[0], 2)
    except (AttributeError, OSError):  # not available on Windows
        return None


def timed(fn, repeats: int) -> list[float]:
    out = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--smoke", action="store_true", help="tiny quick run (CI)")
    parser.add_argument("--out-dir", type=Path, default=Path(__file__).parent / "results")
    args = parser.parse_args(argv)
    n_rows, n_events, repeats, commits = (
        (1_000, 1_000, 2, 10) if args.smoke else (100_000, 100_000, 7, 200)
    )

    source, events = make_log(n_rows, n_events, seed=7)
    live = LabelState.replay(source, events)
    replay_times = timed(lambda: LabelState.replay(source, events), repeats)

    def one_by_one() -> None:
        state = LabelState(source)
        for ev in events:
            state.apply(ev)

    apply_times = timed(one_by_one, max(2, repeats // 2))
    check = LabelState(source)
    for ev in events:
        check.apply(ev)
    assert check.labels.tolist() == live.labels.tolist(), "replay and apply disagree"

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.mrs"
        with SessionFile.create(path, {"reviewer": "bench"}) as sf:
            state = LabelState(source)
            commit_times = []
            for i in range(commits):
                ev = state.make_edit("relabel", [i % n_rows], reviewer="bench", label="other")
                t0 = time.perf_counter()
                saved = sf.append_event(ev)
                commit_times.append(time.perf_counter() - t0)
                state.apply(saved)
        # Loading the whole log back: written in one transaction here only to save time;
        # the rows are encoded by the same append path, one event each.
        load_path = Path(tmp) / "load.mrs"
        with SessionFile.create(load_path, {"reviewer": "bench"}) as sf:
            sf._conn.execute("PRAGMA synchronous = OFF")
            for ev in events:
                sf.append_event(dataclasses.replace(ev, seq=0))
        with SessionFile.open(load_path, read_only=True) as sf:
            load_times = timed(sf.events, max(2, repeats // 2))
            file_mb = load_path.stat().st_size / 1e6

    result = {
        "python": platform.python_version(),
        "cores": os.cpu_count(),
        "platform": platform.platform(),
        "load_average_1min": _load(),
        "smoke": args.smoke,
        "rows": n_rows,
        "replay": {
            "events": n_events,
            "live_edits": len(live.live_edits()),
            "runs": repeats,
            "median_s": statistics.median(replay_times),
            "min_s": min(replay_times),
        },
        "apply_one_by_one": {"median_s": statistics.median(apply_times)},
        "load_events": {"median_s": statistics.median(load_times), "file_mb": file_mb},
        "commit": {
            "appends": commits,
            "median_ms": statistics.median(commit_times) * 1e3,
            "p90_ms": float(np.percentile(commit_times, 90) * 1e3),
            "journal": "WAL, synchronous=FULL",
        },
    }
    stem = "replay_smoke" if args.smoke else "replay"
    args.out_dir.mkdir(parents=True, exist_ok=True)
    (args.out_dir / f"{stem}.json").write_text(json.dumps(result, indent=2) + "\n")
    r = result
    md = f"""# Edit log speed{" (smoke run)" if args.smoke else ""}

Python {r["python"]}, {r["cores"]} cores, {r["platform"]}.
Load average (1 min) when the run ended: {r["load_average_1min"]} (other jobs share the
machine; a load above the core count slows every figure here).
{n_events:,} events over a {n_rows:,}-row table (mostly single-row decisions, 0.5% bulk
edits of 20-500 rows, about 6% undo and 3% redo); median of {repeats} runs.

| measure | median | notes |
|---|---|---|
| replay (`LabelState.replay`) | {r["replay"]["median_s"] * 1e3:.1f} ms | {r["replay"]["live_edits"]:,} live edits after undo/redo |
| apply one event at a time | {r["apply_one_by_one"]["median_s"] * 1e3:.1f} ms | same log through `apply` |
| load events from the file | {r["load_events"]["median_s"] * 1e3:.1f} ms | `SessionFile.events()`, file {file_mb:.1f} MB |
| one append + commit | {r["commit"]["median_ms"]:.2f} ms | p90 {r["commit"]["p90_ms"]:.2f} ms over {commits} appends, {r["commit"]["journal"]} |
"""  # noqa: E501
    (args.out_dir / f"{stem}.md").write_text(md)
    print(md)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
