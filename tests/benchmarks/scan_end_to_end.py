"""The whole scan command, timed from outside, against six bare LinearSVC fits in the same run.

A Parquet table (n x 20 numbers and a pass/fail label with 7% flipped, synthetic, for timing
only) is written once to a temporary folder. Then, in the same run:

* the command a user runs, as a child process, from process start to the output written:
  ``python -m reviewer scan DATA --label y --kernel linear --C 1 --folds 5 --out out.csv``
  (median of ``--repeats``), with that child's peak RSS (os.wait4's ru_maxrss);
* the baseline: six bare ``LinearSVC(dual=False, C=1)`` fits (scikit-learn's liblinear
  primal solver) on the same standardised matrix, one on every row and one on each fold's
  training rows, as the scan fits once and then once per fold. LinearSVC minimises the
  squared hinge loss with a penalised intercept: a different, smoother objective than the
  scan's exact hinge (whose duality gap the scan certifies), so it is a yardstick of work,
  not the same answer;
* a breakdown by stage in a child process, with timers around the steps ``scan`` takes
  (load, roles, features, labels and ids, the fit with its held-out folds and, inside it,
  the six hinge solves, the duplicate check, the scan table, the CSV).

``--before PATH`` also times the command with the code of another checkout (PATH on
PYTHONPATH), for a before/after in the same run. ``--huge`` adds one scan of 10,000,000 rows
for its time and peak memory.

    python -m tests.benchmarks.scan_end_to_end [--rows 1000000] [--repeats 3] [--smoke]
        [--huge] [--before /path/to/checkout] [--out-dir DIR]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
RESULTS = Path(__file__).resolve().parent / "results"
N_FEATURES = 20
HUGE_ROWS = 10_000_000
SCAN_ARGS = ["--label", "y", "--kernel", "linear", "--C", "1", "--folds", "5", "--quiet"]


def write_table(path: Path, n: int, seed: int = 0) -> None:
    """A noisy linear problem, 7% of labels flipped, written block by block to Parquet."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(seed)
    w = rng.standard_normal(N_FEATURES)
    writer = None
    for start in range(0, n, 1_000_000):
        m = min(1_000_000, n - start)
        X = rng.standard_normal((m, N_FEATURES))
        y = np.where(X @ w + 0.5 * rng.standard_normal(m) > 0, "pass", "fail")
        flip = rng.random(m) < 0.07
        y[flip] = np.where(y[flip] == "pass", "fail", "pass")
        cols = {f"x{j}": X[:, j] for j in range(N_FEATURES)}
        table = pa.table({**cols, "y": y})
        writer = writer or pq.ParquetWriter(path, table.schema)
        writer.write_table(table)
    assert writer is not None
    writer.close()


def available_mb() -> float:
    """MemAvailable from /proc/meminfo (Linux), else infinity."""
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return float("inf")


def run_scan(data: Path, out: Path, code: Path, keep_free_mb: float = 1500.0) -> dict:
    """One scan as a child process: wall seconds and that child's peak RSS. The child is
    stopped if the machine's available memory falls under ``keep_free_mb``."""
    env = {**os.environ, "PYTHONPATH": str(code)}
    cmd = [sys.executable, "-m", "reviewer", "scan", str(data), *SCAN_ARGS, "--out", str(out)]
    started = time.perf_counter()
    child = subprocess.Popen(cmd, env=env, cwd=code, stderr=subprocess.DEVNULL)
    lowest = float("inf")
    while True:
        pid, status, usage = os.wait4(child.pid, os.WNOHANG)
        if pid:
            break
        lowest = min(lowest, available_mb())
        if lowest < keep_free_mb:
            child.kill()
            os.wait4(child.pid, 0)
            return {"stopped": f"machine memory under {keep_free_mb:.0f} MiB free"}
        time.sleep(0.2)
    seconds = time.perf_counter() - started
    code_ = os.waitstatus_to_exitcode(status)
    child.returncode = code_
    if code_ != 0:
        raise RuntimeError(f"scan failed with exit code {code_}: {' '.join(cmd)}")
    return {
        "seconds": seconds,
        "cpu_seconds": usage.ru_utime + usage.ru_stime,
        "peak_rss_mb": usage.ru_maxrss / 1024,
        "lowest_available_mb": lowest,
    }


def baseline_fits(data: Path) -> dict:
    """Six bare LinearSVC(dual=False) fits on the standardised matrix (in a child process)."""
    code = f"""
import json, time, numpy as np, pyarrow.parquet as pq
from sklearn.model_selection import StratifiedKFold
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC
t = pq.read_table({str(data)!r})
X = np.column_stack([t.column(f"x{{j}}").to_numpy() for j in range({N_FEATURES})])
y = np.asarray(t.column("y").to_pylist())
del t
X = StandardScaler().fit_transform(X)
fits, cpu = [], 0.0
started, cpu0 = time.perf_counter(), time.process_time()
LinearSVC(dual=False, C=1.0).fit(X, y)
fits.append(time.perf_counter() - started)
cpu += time.process_time() - cpu0
for train, _ in StratifiedKFold(5, shuffle=True, random_state=0).split(X, y):
    Xt, yt = X[train], y[train]
    started, cpu0 = time.perf_counter(), time.process_time()
    LinearSVC(dual=False, C=1.0).fit(Xt, yt)
    fits.append(time.perf_counter() - started)
    cpu += time.process_time() - cpu0
print(json.dumps({{"seconds": sum(fits), "cpu_seconds": cpu, "fits": fits}}))
"""
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def stages(data: Path, out: Path) -> dict:
    """The scan command's steps with a timer around each (run in a fresh child process)."""
    started = time.perf_counter()
    marks: dict[str, float] = {}

    def mark(name: str, since: float) -> float:
        now = time.perf_counter()
        marks[name] = marks.get(name, 0.0) + now - since
        return now

    from reviewer.core.data.dataset import row_ids
    from reviewer.core.data.duplicates import conflicting_duplicates
    from reviewer.core.data.features import feature_matrix
    from reviewer.core.data.loading import label_strings, load_table
    from reviewer.core.data.roles import infer_roles
    from reviewer.core.model import solvers
    from reviewer.core.model.fitting import fit_margins
    from reviewer.core.model.scan import scan_frame
    from reviewer.core.output.scantable import write_scan_table
    from reviewer.core.values import FitSettings, formula_warning

    hinge_seconds: list[float] = []
    solve = solvers.fit_linear_hinge

    def timed_solve(*args: Any, **kwargs: Any) -> Any:
        t0 = time.perf_counter()
        try:
            return solve(*args, **kwargs)
        finally:
            hinge_seconds.append(time.perf_counter() - t0)

    solvers.fit_linear_hinge = timed_solve
    t = mark("imports", started)
    loaded = load_table(data)
    t = mark("load Parquet (and SHA-256)", t)
    roles = infer_roles(loaded.frame, "y")
    t = mark("column roles", t)
    X, _ = feature_matrix(loaded.frame, roles)
    t = mark("features", t)
    labels = label_strings(loaded.frame["y"])
    ids = row_ids(loaded.frame, None)
    t = mark("labels and row ids", t)
    fit = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=5))
    t = mark("fit_margins (1 fit + 5 folds)", t)
    formula_warning(labels, "labels")
    conflicting_duplicates(loaded.frame, roles, labels)
    t = mark("duplicate check, formula check", t)
    table = scan_frame(fit, labels, ids)
    t = mark("scan table", t)
    write_scan_table(table, out)
    mark("write CSV", t)
    marks["of which the six hinge solves"] = sum(hinge_seconds)
    marks["hinge solves"] = len(hinge_seconds)
    return marks


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--smoke", action="store_true", help="20,000 rows, once")
    parser.add_argument("--huge", action="store_true", help=f"also {HUGE_ROWS:,} rows, once")
    parser.add_argument("--before", help="another checkout to time the same command with")
    parser.add_argument("--out-dir", default=str(RESULTS))
    parser.add_argument("--stages", nargs=2, metavar=("DATA", "OUT"), help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.stages:
        print(json.dumps(stages(Path(args.stages[0]), Path(args.stages[1]))))
        return 0
    rows = 20_000 if args.smoke else args.rows
    repeats = 1 if args.smoke else args.repeats
    out_dir = Path(args.out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    record: dict = {"rows": rows, "columns": N_FEATURES, "repeats": repeats}
    with tempfile.TemporaryDirectory() as tmp:
        data, out = Path(tmp) / "table.parquet", Path(tmp) / "out.csv"
        write_table(data, rows)
        record["parquet_mb"] = data.stat().st_size / 2**20
        scans, baselines, before = [], [], []
        for _ in range(repeats):
            scans.append(run_scan(data, out, ROOT))
            baselines.append(baseline_fits(data))
            if args.before:
                before.append(run_scan(data, out, Path(args.before)))
        done = subprocess.run(
            [sys.executable, "-m", "tests.benchmarks.scan_end_to_end", "--stages", *(data, out)],
            capture_output=True,
            text=True,
            check=True,
            cwd=ROOT,
            env={**os.environ, "PYTHONPATH": str(ROOT)},
        )
        record["stages"] = json.loads(done.stdout.strip().splitlines()[-1])
        record["scan_seconds"] = [s["seconds"] for s in scans]
        record["scan_peak_rss_mb"] = max(s["peak_rss_mb"] for s in scans)
        record["baseline_seconds"] = [b["seconds"] for b in baselines]
        record["scan_median"] = statistics.median(record["scan_seconds"])
        record["baseline_median"] = statistics.median(record["baseline_seconds"])
        record["ratio"] = record["scan_median"] / record["baseline_median"]
        # Each scan beside the baseline run right after it: the load they met was alike.
        pairs = [s["seconds"] / b["seconds"] for s, b in zip(scans, baselines, strict=True)]
        record["ratio_by_repeat"] = pairs
        record["ratio_median_of_repeats"] = statistics.median(pairs)
        record["cpu_ratio"] = statistics.median(
            s["cpu_seconds"] / b["cpu_seconds"] for s, b in zip(scans, baselines, strict=True)
        )
        if before:
            record["before_seconds"] = [s["seconds"] for s in before]
            record["before_median"] = statistics.median(record["before_seconds"])
            record["before_ratio"] = record["before_median"] / record["baseline_median"]
            record["before_peak_rss_mb"] = max(s["peak_rss_mb"] for s in before)
            record["before_ratio_median_of_repeats"] = statistics.median(
                s["seconds"] / b["seconds"] for s, b in zip(before, baselines, strict=True)
            )
        if args.huge and not args.smoke:
            big = Path(tmp) / "huge.parquet"
            write_table(big, HUGE_ROWS)
            record["huge"] = {"rows": HUGE_ROWS, "parquet_mb": big.stat().st_size / 2**20}
            try:
                record["huge"].update(run_scan(big, out, ROOT))
            except RuntimeError as exc:  # e.g. killed for memory: say so in the table
                record["huge"]["stopped"] = str(exc)
    record["machine"] = f"{platform.machine()}, {os.cpu_count()} cores, {platform.system()}"
    record["python"] = platform.python_version()
    name = "scan_end_to_end_smoke" if args.smoke else "scan_end_to_end"
    (out_dir / f"{name}.json").write_text(json.dumps(record, indent=1) + "\n", encoding="utf-8")
    (out_dir / f"{name}.md").write_text(markdown(record), encoding="utf-8")
    print(markdown(record))
    return 0


def markdown(r: dict) -> str:
    lines = [
        "# Scan end to end: the command against six bare LinearSVC fits",
        "",
        f"{r['rows']:,} rows x {r['columns']} numeric columns from Parquet "
        f"({r['parquet_mb']:,.0f} MiB), `scan --kernel linear --C 1 --folds 5 --out out.csv`, "
        f"as a child process from start to output written; median of {r['repeats']}. "
        f"Machine: {r['machine']}, Python {r['python']}; other work shared the machine, so "
        "only ratios within this run mean much.",
        "",
        "Baseline: six `LinearSVC(dual=False, C=1)` fits (one on every row, one on each of 5 "
        "folds' training rows) on the same standardised matrix. LinearSVC minimises the "
        "squared hinge with a penalised intercept, a different objective from the scan's "
        "exact hinge with its certified duality gap.",
        "",
        "| measure | seconds | x baseline |",
        "|---|---:|---:|",
        f"| scan command (this code) | {r['scan_median']:.2f} | {r['ratio']:.2f} |",
    ]
    if "before_median" in r:
        lines.append(
            f"| scan command (code before) | {r['before_median']:.2f} | {r['before_ratio']:.2f} |"
        )
    lines += [
        f"| six bare LinearSVC(dual=False) fits | {r['baseline_median']:.2f} | 1.00 |",
        "",
        "Ratio repeat by repeat (each scan against the baseline run beside it): "
        + ", ".join(f"{x:.2f}" for x in r["ratio_by_repeat"])
        + f" (median {r['ratio_median_of_repeats']:.2f})"
        + (
            f"; code before: median {r['before_ratio_median_of_repeats']:.2f}"
            if "before_ratio_median_of_repeats" in r
            else ""
        )
        + f". In CPU seconds (less sensitive to the machine's other work; the scan's BLAS "
        f"and CSV threads count in full): {r['cpu_ratio']:.2f} x the baseline.",
        "",
        f"Peak RSS of the scan child: {r['scan_peak_rss_mb']:,.0f} MiB"
        + (
            f" (code before: {r['before_peak_rss_mb']:,.0f} MiB)."
            if "before_peak_rss_mb" in r
            else "."
        ),
        "",
        "## Where the time goes (one run, timers around each step, in a child process)",
        "",
        "| stage | seconds |",
        "|---|---:|",
    ]
    inner = ("hinge solves", "of which the six hinge solves")
    for name, value in r["stages"].items():
        if name == "fit_margins (1 fit + 5 folds)":
            solves = r["stages"]["of which the six hinge solves"]
            lines.append(f"| {name} | {value:.2f} |")
            lines.append(f"| &nbsp;&nbsp;of which the six hinge solves | {solves:.2f} |")
            lines.append(
                f"| &nbsp;&nbsp;rest of the fit (scoring, folds' copies) | {value - solves:.2f} |"
            )
        elif name not in inner:
            lines.append(f"| {name} | {value:.2f} |")
    total = sum(
        v
        for k, v in r["stages"].items()
        if k not in ("hinge solves", "of which the six hinge solves")
    )
    lines.append(f"| total of the stages | {total:.2f} |")
    if "huge" in r:
        h = r["huge"]
        lines += [
            "",
            f"## {h['rows']:,} rows ({h['parquet_mb']:,.0f} MiB Parquet), once",
            "",
            f"Scan command: {h['seconds']:.1f} s; peak RSS {h['peak_rss_mb'] / 1024:.2f} GiB."
            if "seconds" in h
            else f"Scan command stopped: {h['stopped']}.",
        ]
        lines += [
            "",
            "What holds the memory (by array sizes, float64): the loaded table (about 1.6 GB), "
            "the feature matrix (1.6 GB; the ColumnTransformer stacks a second copy while "
            "building it), each fold's training and held-out rows copied from it (1.6 GB), "
            "the solver's per-row vectors, and the text of row ids and labels.",
        ]
        if "huge_note" in r:
            lines += ["", f"({r['huge_note']}.)"]
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    sys.exit(main())
