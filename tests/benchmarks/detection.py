"""Detection quality: how well each ranking puts planted label flips at the top.

    python tests/benchmarks/detection.py                    # full run (4 datasets, 5 seeds)
    python tests/benchmarks/detection.py --smoke --out-dir /tmp/x   # tiny run for CI

Datasets: scikit-learn's bundled breast-cancer and digits tables (digits subsampled) and two
synthetic sets from sklearn.datasets (two moons with noise features; a 9:1 imbalanced set).
Noise: uniform flips to a random other class, or class-conditional flips (digits: between the
most-confused pair of classes; binary sets: from one class only). Rankings: the tool's
training and held-out margins (linear and rbf, C=1, gamma 'scale'), the ``auto`` default, and
scikit-learn baselines (out-of-fold logistic regression, out-of-fold k-nearest neighbours,
random order). Writes results/detection.md and detection.json (or into --out-dir).
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
from sklearn.datasets import load_breast_cancer, load_digits, make_classification, make_moons
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import average_precision_score, confusion_matrix, roc_auc_score
from sklearn.model_selection import StratifiedKFold, cross_val_predict, train_test_split
from sklearn.neighbors import NearestNeighbors
from sklearn.preprocessing import StandardScaler

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

RESULTS = Path(__file__).resolve().parent / "results"
RATES = (0.05, 0.10, 0.20, 0.30)
SEEDS = (0, 1, 2, 3, 4)
NOISES = ("uniform", "class_pair")
MAX_ROWS = 600
# Digits has 10 one-against-rest problems; `auto` took ~16 s per fit at 600 rows here (2 shared
# cores), which alone would use most of the 25-minute budget, so digits is capped lower.
DIGITS_ROWS = 400
KNN_K = 10
OOF_FOLDS = 5
REVIEW_SHARES = (0.05, 0.10, 0.20)
METHODS = (
    "auto",
    "auto_training",
    "linear_training",
    "linear_heldout",
    "rbf_training",
    "rbf_heldout",
    "logreg_oof",
    "knn_oof",
    "random",
)
BASELINES = ("logreg_oof", "knn_oof", "random")
DESCRIPTIONS = {
    "auto": "tool default: FitSettings() (kernel/C/gamma chosen by auto), its score column",
    "auto_training": "same auto fit, ranked by -margin (training margin)",
    "linear_training": "linear, C=1, ranked by -margin",
    "linear_heldout": "linear, C=1, 5 folds, ranked by -heldout_margin",
    "rbf_training": "rbf, C=1, gamma scale, ranked by -margin",
    "rbf_heldout": "rbf, C=1, gamma scale, 5 folds, ranked by -heldout_margin",
    "logreg_oof": "1 - out-of-fold logistic-regression probability of the given label (5 folds)",
    "knn_oof": "share of the 10 nearest rows outside the row's fold with a different label",
    "random": "random order",
}


# ---------------------------------------------------------------- datasets


def _cap(X: np.ndarray, y: np.ndarray, rows: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    if len(y) <= rows:
        return X, y
    keep, _ = train_test_split(np.arange(len(y)), train_size=rows, stratify=y, random_state=seed)
    keep = np.sort(keep)
    return X[keep], y[keep]


def make_datasets(max_rows: int, names: tuple[str, ...] | None = None) -> dict[str, dict]:
    """name -> {X (standardised), y (int), note}. Every set is fixed; only the noise varies."""
    out: dict[str, dict] = {}
    if names is None or "breast_cancer" in names:
        X, y = load_breast_cancer(return_X_y=True)
        X, y = _cap(X, y, max_rows)
        out["breast_cancer"] = {"X": X, "y": y, "note": "sklearn load_breast_cancer"}
    if names is None or "digits" in names:
        X, y = load_digits(return_X_y=True)
        X, y = _cap(X, y, min(max_rows, DIGITS_ROWS))
        out["digits"] = {"X": X, "y": y, "note": f"sklearn load_digits, {len(y)} rows stratified"}
    if names is None or "moons_noise" in names:
        X, y = make_moons(n_samples=max_rows, noise=0.25, random_state=0)
        extra = np.random.default_rng(0).normal(size=(max_rows, 6))
        X = np.hstack([X, extra])
        out["moons_noise"] = {
            "X": X,
            "y": y,
            "note": "make_moons(noise=0.25) + 6 Gaussian noise features (non-linear boundary)",
        }
    if names is None or "imbalanced" in names:
        X, y = make_classification(
            n_samples=max_rows,
            n_features=20,
            n_informative=5,
            n_redundant=2,
            weights=[0.9, 0.1],
            flip_y=0.0,
            class_sep=1.0,
            random_state=0,
        )
        out["imbalanced"] = {"X": X, "y": y, "note": "make_classification(weights=[0.9, 0.1])"}
    for d in out.values():
        # The tool standardises numeric columns; the baselines get the same matrix.
        d["X"] = StandardScaler().fit_transform(d["X"])
        d["y"] = np.asarray(d["y"], dtype=int)
    return out


def confused_pair(X: np.ndarray, y: np.ndarray) -> tuple[int, int]:
    """The two classes an out-of-fold logistic regression mixes up most (both directions)."""
    pred = cross_val_predict(LogisticRegression(max_iter=2000), X, y, cv=5)
    cm = confusion_matrix(y, pred).astype(float)
    both = cm + cm.T
    np.fill_diagonal(both, -1)
    i, j = np.unravel_index(np.argmax(both), both.shape)
    return int(min(i, j)), int(max(i, j))


def source_classes(y: np.ndarray, pair: tuple[int, int] | None) -> tuple[int, ...]:
    """Classes whose rows may be flipped in the class-conditional model."""
    classes, counts = np.unique(y, return_counts=True)
    if len(classes) > 2:
        return pair  # type: ignore[return-value]
    # Binary: flip from the smaller class only (missed positives, the common real error);
    # with balanced classes that is simply the first class.
    return (int(classes[np.argmin(counts)]),)


def plant(
    y: np.ndarray, noise: str, rate: float, rng: np.random.Generator, pair: tuple[int, int] | None
) -> tuple[np.ndarray, np.ndarray]:
    """(noisy labels, boolean flipped mask)."""
    classes = np.unique(y)
    noisy = y.copy()
    if noise == "uniform":
        pool = np.arange(len(y))
    else:
        pool = np.flatnonzero(np.isin(y, source_classes(y, pair)))
    n_flip = max(1, round(rate * len(pool)))
    rows = rng.choice(pool, size=n_flip, replace=False)
    for r in rows:
        if noise == "uniform":
            others = classes[classes != y[r]]
            noisy[r] = rng.choice(others)
        elif len(classes) > 2:
            a, b = pair  # type: ignore[misc]
            noisy[r] = b if y[r] == a else a
        else:
            noisy[r] = classes[classes != y[r]][0]
    flipped = noisy != y
    return noisy, flipped


# ---------------------------------------------------------------- rankings


def svm_scores(X: np.ndarray, labels: np.ndarray, seed: int) -> tuple[dict, dict]:
    """Suspicion scores (higher = more suspect) from the tool, and seconds per fit."""
    lab = labels.astype(str).astype(object)
    scores: dict[str, np.ndarray] = {}
    secs: dict[str, float] = {}
    t = time.perf_counter()
    fit = fit_margins(X, lab, FitSettings(seed=seed))
    secs["auto"] = time.perf_counter() - t
    scores["auto"] = fit.rows["score"].to_numpy(float)
    scores["auto_training"] = -fit.rows["margin"].to_numpy(float)
    chosen = f"{fit.settings.kernel} C={float(fit.settings.C):g}"
    for kernel in ("linear", "rbf"):
        t = time.perf_counter()
        fit = fit_margins(X, lab, FitSettings(kernel=kernel, C=1.0, gamma="scale", seed=seed))
        secs[kernel] = time.perf_counter() - t
        scores[f"{kernel}_training"] = -fit.rows["margin"].to_numpy(float)
        scores[f"{kernel}_heldout"] = -fit.rows["heldout_margin"].to_numpy(float)
    secs["auto_choice"] = chosen  # type: ignore[assignment]
    return scores, secs


def logreg_oof(X: np.ndarray, labels: np.ndarray, seed: int) -> np.ndarray:
    cv = StratifiedKFold(n_splits=OOF_FOLDS, shuffle=True, random_state=seed)
    proba = cross_val_predict(
        LogisticRegression(max_iter=2000), X, labels, cv=cv, method="predict_proba"
    )
    classes = np.unique(labels)
    col = np.searchsorted(classes, labels)
    return 1.0 - proba[np.arange(len(labels)), col]


def knn_oof(X: np.ndarray, labels: np.ndarray, seed: int, k: int = KNN_K) -> np.ndarray:
    cv = StratifiedKFold(n_splits=OOF_FOLDS, shuffle=True, random_state=seed)
    out = np.empty(len(labels))
    for train, test in cv.split(X, labels):
        nn = NearestNeighbors(n_neighbors=k).fit(X[train])
        _, idx = nn.kneighbors(X[test])
        out[test] = np.mean(labels[train][idx] != labels[test][:, None], axis=1)
    return out


# ---------------------------------------------------------------- metrics


def metrics(score: np.ndarray, flipped: np.ndarray, rng: np.random.Generator) -> dict:
    # Ties are broken at random so a coarse score (kNN shares) is not flattered by row order.
    order = np.lexsort((rng.random(len(score)), -score))
    hits = flipped[order]
    k = int(flipped.sum())
    n = len(score)
    out = {
        "auroc": float(roc_auc_score(flipped, score)),
        "ap": float(average_precision_score(flipped, score)),
        "precision_at_k": float(hits[:k].mean()),
    }
    for share in REVIEW_SHARES:
        top = max(1, round(share * n))
        out[f"recall_top{int(share * 100)}"] = float(hits[:top].sum() / k)
    return out


# ---------------------------------------------------------------- run


def run(datasets: dict, rates, seeds, noises, log) -> tuple[list[dict], dict]:
    records: list[dict] = []
    timing: dict[str, float] = {}
    for name, d in datasets.items():
        X, y = d["X"], d["y"]
        pair = confused_pair(X, y) if len(np.unique(y)) > 2 else None
        d["pair"] = pair
        d["source_classes"] = [int(c) for c in source_classes(y, pair)]
        for noise in noises:
            for rate in rates:
                for seed in seeds:
                    rng = np.random.default_rng([seed, int(rate * 1000), len(noise)])
                    noisy, flipped = plant(y, noise, rate, rng, pair)
                    t0 = time.perf_counter()
                    scores, secs = svm_scores(X, noisy, seed)
                    t = time.perf_counter()
                    scores["logreg_oof"] = logreg_oof(X, noisy, seed)
                    secs["logreg_oof"] = time.perf_counter() - t
                    t = time.perf_counter()
                    scores["knn_oof"] = knn_oof(X, noisy, seed)
                    secs["knn_oof"] = time.perf_counter() - t
                    scores["random"] = rng.random(len(y))
                    for key, val in secs.items():
                        if isinstance(val, float):
                            timing[key] = timing.get(key, 0.0) + val
                    for method in METHODS:
                        # Every labelled row must be ranked; a NaN score would skew the metrics.
                        assert np.isfinite(scores[method]).all(), f"{method} left rows unscored"
                        m = metrics(scores[method], flipped, rng)
                        records.append(
                            {
                                "dataset": name,
                                "noise": noise,
                                "rate": rate,
                                "seed": seed,
                                "method": method,
                                "n_rows": len(y),
                                "n_flipped": int(flipped.sum()),
                                **m,
                            }
                        )
                    log(
                        f"{name} {noise} {rate:.2f} seed {seed}: "
                        f"{time.perf_counter() - t0:.1f} s, auto chose {secs['auto_choice']}"
                    )
    return records, timing


METRIC_KEYS = ("auroc", "ap", "precision_at_k", "recall_top5", "recall_top10", "recall_top20")


def summarise(records: list[dict]) -> list[dict]:
    groups: dict[tuple, list[dict]] = {}
    for r in records:
        groups.setdefault((r["dataset"], r["noise"], r["rate"], r["method"]), []).append(r)
    out = []
    for (ds, noise, rate, method), rs in groups.items():
        entry = {
            "dataset": ds,
            "noise": noise,
            "rate": rate,
            "method": method,
            "seeds": len(rs),
            "n_flipped": float(np.mean([r["n_flipped"] for r in rs])),
        }
        for key in METRIC_KEYS:
            vals = [r[key] for r in rs]
            entry[key] = float(np.mean(vals))
            entry[f"{key}_sd"] = float(np.std(vals))
        out.append(entry)
    return out


def blas_info() -> str:
    try:
        from threadpoolctl import threadpool_info

        return "; ".join(
            f"{i.get('internal_api')} {i.get('version')} ({i.get('num_threads')} threads)"
            for i in threadpool_info()
        )
    except Exception as exc:
        return f"unknown ({exc})"


def verdicts(summary: list[dict]) -> list[dict]:
    idx = {(s["dataset"], s["noise"], s["rate"], s["method"]): s for s in summary}
    out = []
    for ds, noise, rate in sorted({(s["dataset"], s["noise"], s["rate"]) for s in summary}):
        auto = idx[(ds, noise, rate, "auto")]["ap"]
        best_name = max(BASELINES, key=lambda m: idx[(ds, noise, rate, m)]["ap"])
        best = idx[(ds, noise, rate, best_name)]["ap"]
        out.append(
            {
                "dataset": ds,
                "noise": noise,
                "rate": rate,
                "auto_ap": auto,
                "best_baseline": best_name,
                "best_baseline_ap": best,
                "auto_at_or_above": bool(auto >= best - 1e-12),
            }
        )
    return out


def verdicts_by_noise(summary: list[dict]) -> list[dict]:
    """The same comparison with AP averaged over rates as well as seeds."""
    out = []
    for ds, noise in sorted({(s["dataset"], s["noise"]) for s in summary}):
        mean = {
            m: float(
                np.mean(
                    [
                        s["ap"]
                        for s in summary
                        if (s["dataset"], s["noise"], s["method"]) == (ds, noise, m)
                    ]
                )
            )
            for m in METHODS
        }
        best_name = max(BASELINES, key=lambda m: mean[m])
        out.append(
            {
                "dataset": ds,
                "noise": noise,
                "auto_ap": mean["auto"],
                "best_baseline": best_name,
                "best_baseline_ap": mean[best_name],
                "best_tool_ranking": max(
                    (m for m in METHODS if m not in BASELINES), key=lambda m: mean[m]
                ),
                "auto_at_or_above": bool(mean["auto"] >= mean[best_name] - 1e-12),
            }
        )
    return out


def score_recommendation(summary: list[dict]) -> dict:
    """Training vs held-out margin, pairwise over every (dataset, noise, rate) cell."""
    idx = {(s["dataset"], s["noise"], s["rate"], s["method"]): s["ap"] for s in summary}
    cells = sorted({(s["dataset"], s["noise"], s["rate"]) for s in summary})
    out = {}
    for held, train in (
        ("auto", "auto_training"),
        ("linear_heldout", "linear_training"),
        ("rbf_heldout", "rbf_training"),
    ):
        diffs = [idx[(*c, held)] - idx[(*c, train)] for c in cells]
        out[held.replace("_heldout", "")] = {
            "heldout_wins": int(sum(d > 0 for d in diffs)),
            "training_wins": int(sum(d < 0 for d in diffs)),
            "mean_ap_heldout_minus_training": float(np.mean(diffs)),
        }
    total = sum(v["mean_ap_heldout_minus_training"] for v in out.values())
    out["recommend"] = "heldout" if total >= 0 else "training"
    return out


def write_markdown(path: Path, header: dict, summary: list[dict], ver: list[dict], rec: dict):
    lines = ["# Detection of planted label flips", ""]
    lines += [f"- {k}: {v}" for k, v in header.items() if k not in ("datasets", "methods")]
    lines += ["", "## Datasets", ""]
    for name, d in header["datasets"].items():
        lines.append(f"- **{name}**: {d}")
    lines += ["", "## Methods (higher score = reviewed first)", ""]
    lines += [f"- `{m}`: {DESCRIPTIONS[m]}" for m in METHODS]
    lines += [
        "",
        "Rates are the share of all rows (uniform) or of the source class rows (class_pair).",
        "",
        "## Mean average precision (over seeds)",
        "",
    ]
    idx = {(s["dataset"], s["noise"], s["rate"], s["method"]): s for s in summary}
    rates = sorted({s["rate"] for s in summary})
    for ds in dict.fromkeys(s["dataset"] for s in summary):
        for noise in dict.fromkeys(s["noise"] for s in summary):
            lines += [f"### {ds}, {noise}", ""]
            lines.append("| method | " + " | ".join(f"{r:.0%}" for r in rates) + " |")
            lines.append("|---|" + "---:|" * len(rates))
            for m in METHODS:
                cells = []
                col_best = {
                    r: max(idx[(ds, noise, r, mm)]["ap"] for mm in METHODS if mm != "random")
                    for r in rates
                }
                for r in rates:
                    v = idx[(ds, noise, r, m)]["ap"]
                    cells.append(f"**{v:.3f}**" if v == col_best[r] else f"{v:.3f}")
                lines.append(f"| {m} | " + " | ".join(cells) + " |")
            lines.append("")
    lines += ["## Verdict: `auto` against the best baseline (mean AP)", ""]
    lines += ["Averaged over rates and seeds:", ""]
    lines.append(
        "| dataset | noise | auto | best baseline | its AP | best tool ranking | verdict |"
    )
    lines.append("|---|---|---:|---|---:|---|---|")
    for v in verdicts_by_noise(summary):
        lines.append(
            f"| {v['dataset']} | {v['noise']} | {v['auto_ap']:.3f} | {v['best_baseline']} | "
            f"{v['best_baseline_ap']:.3f} | {v['best_tool_ranking']} | "
            f"{'auto at or above' if v['auto_at_or_above'] else '**auto below**'} |"
        )
    lines += ["", "Per rate (averaged over seeds):", ""]
    lines.append("| dataset | noise | rate | auto | best baseline | its AP | auto at or above? |")
    lines.append("|---|---|---:|---:|---|---:|---|")
    for v in ver:
        lines.append(
            f"| {v['dataset']} | {v['noise']} | {v['rate']:.0%} | {v['auto_ap']:.3f} | "
            f"{v['best_baseline']} | {v['best_baseline_ap']:.3f} | "
            f"{'yes' if v['auto_at_or_above'] else '**no**'} |"
        )
    below = [v for v in ver if not v["auto_at_or_above"]]
    lines.append("")
    if below:
        lines.append(
            f"`auto` is below the best baseline in {len(below)} of {len(ver)} cells: "
            + "; ".join(
                f"{v['dataset']}/{v['noise']}/{v['rate']:.0%} "
                f"({v['auto_ap']:.3f} vs {v['best_baseline']} {v['best_baseline_ap']:.3f})"
                for v in below
            )
            + "."
        )
    else:
        lines.append("`auto` is at or above the best baseline in every cell.")
    lines += ["", "## Default score: training or held-out margin", ""]
    lines.append("| fit | held-out better | training better | mean AP (held-out - training) |")
    lines.append("|---|---:|---:|---:|")
    for k, v in rec.items():
        if k == "recommend":
            continue
        lines.append(
            f"| {k} | {v['heldout_wins']} | {v['training_wins']} | "
            f"{v['mean_ap_heldout_minus_training']:+.3f} |"
        )
    lines += ["", f"Recommended default score: **{rec['recommend']}**.", ""]
    lines += ["## Full table (means over seeds; sd in brackets)", ""]
    lines.append(
        "| dataset | noise | rate | method | flips | AUROC | AP | P@k | R@5% | R@10% | R@20% |"
    )
    lines.append("|---|---|---:|---|---:|---:|---:|---:|---:|---:|---:|")
    for s in summary:
        lines.append(
            f"| {s['dataset']} | {s['noise']} | {s['rate']:.0%} | {s['method']} | "
            f"{s['n_flipped']:.0f} | {s['auroc']:.3f} | {s['ap']:.3f} ({s['ap_sd']:.3f}) | "
            f"{s['precision_at_k']:.3f} | {s['recall_top5']:.3f} | {s['recall_top10']:.3f} | "
            f"{s['recall_top20']:.3f} |"
        )
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--smoke", action="store_true", help="1 dataset, 1 rate, 1 seed, tiny")
    parser.add_argument("--out-dir", default=str(RESULTS))
    parser.add_argument("--seeds", type=int, default=len(SEEDS))
    parser.add_argument("--rows", type=int, default=MAX_ROWS)
    parser.add_argument(
        "--from-json", help="rewrite the markdown from an earlier run's JSON without refitting"
    )
    parser.add_argument("--notes", help="with --from-json: a note for the header")
    args = parser.parse_args(argv)
    if args.from_json:
        src = Path(args.from_json)
        data = json.loads(src.read_text(encoding="utf-8"))
        summary = data["summary"]
        data["verdicts"] = verdicts(summary)
        data["verdicts_by_noise"] = verdicts_by_noise(summary)
        data["score_recommendation"] = score_recommendation(summary)
        if args.notes:
            data["header"]["notes"] = args.notes
        src.write_text(json.dumps(data, indent=1), encoding="utf-8")
        write_markdown(
            src.with_suffix(".md"),
            data["header"],
            summary,
            data["verdicts"],
            data["score_recommendation"],
        )
        return 0
    started = time.perf_counter()
    if args.smoke:
        datasets = make_datasets(120, ("breast_cancer",))
        rates, seeds, noises = (0.10,), (0,), ("uniform",)
        stem = "detection_smoke"
    else:
        datasets = make_datasets(args.rows)
        rates, seeds, noises = RATES, tuple(range(args.seeds)), NOISES
        stem = "detection"
    out_dir = Path(args.out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)

    def log(msg: str) -> None:
        print(f"[{time.perf_counter() - started:7.1f}s] {msg}", flush=True)

    records, timing = run(datasets, rates, seeds, noises, log)
    summary = summarise(records)
    ver = verdicts(summary)
    rec = score_recommendation(summary)
    total = time.perf_counter() - started
    header = {
        "cores": os.cpu_count(),
        "blas": blas_info(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scikit-learn": sklearn.__version__,
        "platform": platform.platform(),
        "seeds": list(seeds),
        "rates": list(rates),
        "noise models": list(noises),
        "max rows per dataset": max(len(d["y"]) for d in datasets.values()),
        "total seconds": round(total, 1),
        "seconds per ranking (summed over runs)": {k: round(v, 1) for k, v in timing.items()},
        "mode": "smoke" if args.smoke else "full",
        "datasets": {
            n: f"{d['note']}; {len(d['y'])} rows, {d['X'].shape[1]} features, "
            f"{len(np.unique(d['y']))} classes; class_pair source classes {d['source_classes']}"
            for n, d in datasets.items()
        },
    }
    (out_dir / f"{stem}.json").write_text(
        json.dumps(
            {
                "header": header,
                "methods": DESCRIPTIONS,
                "summary": summary,
                "verdicts": ver,
                "verdicts_by_noise": verdicts_by_noise(summary),
                "score_recommendation": rec,
                "records": records,
            },
            indent=1,
        ),
        encoding="utf-8",
    )
    write_markdown(out_dir / f"{stem}.md", header, summary, ver, rec)
    log(f"wrote {out_dir / (stem + '.md')} and .json")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
