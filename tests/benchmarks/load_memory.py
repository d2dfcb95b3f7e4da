"""Peak memory of loading a large CSV and building its feature matrix.

Writes a CSV of N rows (17 numeric columns, 2 categorical, 1 label) to a temporary folder,
then, in a child process, loads it with ``load_table`` (recording every progress call),
builds the feature matrix and reads the child's peak resident memory (VmHWM). Budget:
peak < 4 x (float64 feature matrix + raw file bytes).

    python tests/benchmarks/load_memory.py            # 1,000,000 rows
    python tests/benchmarks/load_memory.py --smoke --out-dir /tmp/x   # 50,000 rows
"""

from __future__ import annotations

import argparse
import itertools
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
N_NUMERIC = 17
BUDGET = 4.0


def write_csv(path: Path, n_rows: int, seed: int = 0) -> None:
    """Write in blocks so the writer itself stays small."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    block = 200_000
    with open(path, "w", encoding="utf-8", newline="") as handle:
        for start in range(0, n_rows, block):
            m = min(block, n_rows - start)
            data = {f"num_{i}": rng.normal(size=m).round(5) for i in range(N_NUMERIC)}
            data["colour"] = rng.choice(["red", "green", "blue", "amber"], m)
            data["site"] = rng.choice([f"site_{k}" for k in range(12)], m)
            data["label"] = rng.choice(["ok", "defect", "review"], m)
            pd.DataFrame(data).to_csv(handle, index=False, header=start == 0)


def _peak_rss_bytes() -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) * 1024
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def child(path: Path) -> dict:
    """Runs in a fresh process so its peak memory belongs to this work alone."""
    from reviewer.core.data.features import feature_matrix
    from reviewer.core.data.loading import load_table
    from reviewer.core.data.roles import infer_roles

    base = _peak_rss_bytes()
    calls: list[float] = []
    t0 = time.perf_counter()
    loaded = load_table(path, progress=lambda f, _m: calls.append(float(f)))
    t_load = time.perf_counter() - t0
    assert len(loaded.frame) > 0 and calls and calls[-1] == 1.0, "load reported no completion"
    peak_after_load = _peak_rss_bytes()
    roles = infer_roles(loaded.frame, "label")
    X, names = feature_matrix(loaded.frame, roles)
    t_total = time.perf_counter() - t0
    return {
        "rows": len(loaded.frame),
        "table_columns": int(loaded.frame.shape[1]),
        "features": len(names),
        "file_bytes": path.stat().st_size,
        "matrix_bytes": int(X.nbytes),
        "frame_bytes": int(loaded.frame.memory_usage(deep=True).sum()),
        "baseline_rss_bytes": base,
        "peak_after_load_bytes": peak_after_load,
        "peak_rss_bytes": _peak_rss_bytes(),
        "progress_calls": len(calls),
        "progress_fractions": calls,
        "progress_increasing": all(b >= a for a, b in itertools.pairwise(calls)),
        "load_seconds": round(t_load, 2),
        "load_and_features_seconds": round(t_total, 2),
    }


def header() -> dict:
    import pandas as pd
    import sklearn

    return {
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "pandas": pd.__version__,
        "scikit-learn": sklearn.__version__,
        "platform": platform.platform(),
        "load_average": list(os.getloadavg()),
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--smoke", action="store_true", help="50,000 rows")
    parser.add_argument("--out-dir", type=Path, default=RESULTS)
    parser.add_argument("--child", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child)))
        return 0
    rows = 50_000 if args.smoke else args.rows
    args.out_dir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="load_memory_") as tmp:
        path = Path(tmp) / "big.csv"
        t0 = time.perf_counter()
        write_csv(path, rows)
        write_seconds = round(time.perf_counter() - t0, 2)
        done = subprocess.run(
            [sys.executable, str(Path(__file__).resolve()), "--child", str(path)],
            capture_output=True,
            text=True,
            cwd=ROOT,
            env={**os.environ, "PYTHONPATH": str(ROOT)},
            check=False,
        )
    if done.returncode != 0:
        print(done.stderr, file=sys.stderr)
        return 1
    result = json.loads(done.stdout.strip().splitlines()[-1])
    reference = result["matrix_bytes"] + result["file_bytes"]
    work = result["peak_rss_bytes"] - result["baseline_rss_bytes"]
    result.update(
        write_seconds=write_seconds,
        reference_bytes=reference,
        ratio_peak=round(result["peak_rss_bytes"] / reference, 3),
        ratio_above_baseline=round(work / reference, 3),
        budget=BUDGET,
        budget_met=result["peak_rss_bytes"] < BUDGET * reference,
        mode="smoke" if args.smoke else "full",
        header=header(),
    )
    (args.out_dir / "load_memory.json").write_text(json.dumps(result, indent=2) + "\n")
    (args.out_dir / "load_memory.md").write_text(render(result))
    print(render(result))
    return 0


def render(r: dict) -> str:
    mb = 1 << 20
    h = r["header"]
    fr = r["progress_fractions"]
    lines = [
        f"# Load memory ({r['mode']}: {r['rows']:,} rows)",
        "",
        f"Machine: {h['cores']} cores (shared), load average {h['load_average']}; Python "
        f"{h['python']}, numpy {h['numpy']}, pandas {h['pandas']}, "
        f"scikit-learn {h['scikit-learn']}.",
        "",
        "| quantity | value |",
        "|---|---|",
        f"| raw file | {r['file_bytes'] / mb:,.1f} MiB |",
        f"| feature matrix (float64, {r['features']} columns) | "
        f"{r['matrix_bytes'] / mb:,.1f} MiB |",
        f"| loaded frame (pandas, deep) | {r['frame_bytes'] / mb:,.1f} MiB |",
        f"| child RSS before loading (interpreter + imports) | "
        f"{r['baseline_rss_bytes'] / mb:,.1f} MiB |",
        f"| peak RSS after load_table | {r['peak_after_load_bytes'] / mb:,.1f} MiB |",
        f"| peak RSS after feature_matrix | {r['peak_rss_bytes'] / mb:,.1f} MiB |",
        f"| peak / (matrix + file) | {r['ratio_peak']} (budget < {r['budget']}: "
        f"{'met' if r['budget_met'] else 'NOT met'}) |",
        f"| (peak - baseline) / (matrix + file) | {r['ratio_above_baseline']} |",
        f"| progress calls | {r['progress_calls']} (first {fr[0]:.3f}, last {fr[-1]:.3f}, "
        f"non-decreasing: {r['progress_increasing']}) |",
        f"| load / load + features | {r['load_seconds']} s / {r['load_and_features_seconds']} s |",
        "",
    ]
    return "\n".join(lines)


if __name__ == "__main__":
    raise SystemExit(main())
