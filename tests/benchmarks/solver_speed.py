"""Speed, certified gap and memory of the large-table solvers against scikit-learn.

    python tests/benchmarks/solver_speed.py            # full run, writes results/solver_speed.*
    python tests/benchmarks/solver_speed.py --smoke --out-dir /tmp/x   # seconds, for CI

Each case runs in its own child process so its peak RSS (resource.getrusage ru_maxrss of
that child, which Linux reports in KiB) belongs to that case alone; the figure includes the
data the case generates. Times are wall-clock medians over the repeats stated per row.
"""

from __future__ import annotations

import argparse
import json
import multiprocessing as mp
import os
import platform
import statistics
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

D = 20
SEED = 0
NOISE = 0.07  # share of labels flipped at random
C = 1.0


def linear_data(n: int):
    import numpy as np

    rng = np.random.default_rng(SEED)
    X = rng.standard_normal((n, D))
    w = rng.standard_normal(D)
    y = np.where(X @ w + 0.3 + 0.5 * rng.standard_normal(n) > 0, 1.0, -1.0)
    y[rng.random(n) < NOISE] *= -1
    return X, y


def curved_data(n: int):
    # A noisy problem with a curved boundary, so that an RBF kernel has something to do.
    import numpy as np

    rng = np.random.default_rng(SEED)
    X = rng.standard_normal((n, D))
    w = rng.standard_normal(D)
    z = X @ w / np.sqrt(D) + 0.8 * (X[:, 0] ** 2 - 1) + 0.8 * X[:, 1] * X[:, 2]
    y = np.where(z + 0.3 * rng.standard_normal(n) > 0, 1.0, -1.0)
    y[rng.random(n) < NOISE] *= -1
    return X, y


def _case(kind: str, n: int, opts: dict, queue) -> None:
    import resource
    import warnings

    import numpy as np

    # Import everything before the clock starts, so times are fitting only.
    from scipy.stats import spearmanr
    from sklearn.svm import SVC, LinearSVC

    from reviewer.core.model.solvers import fit_linear_hinge, fit_rbf_approx, hinge_primal

    out: dict = {"kind": kind, "n": n}
    if kind.startswith("rbf"):
        X, y = curved_data(n)
    else:
        X, y = linear_data(n)
    t0 = time.perf_counter()
    if kind == "ours_linear":
        res = fit_linear_hinge(X, y, C, tol=1e-3)
        # The timing only counts if the certificate says the objective was reached.
        assert res.gap <= 1e-3 or not res.converged, f"converged with gap {res.gap}"
        out.update(gap=res.gap, n_iter=res.n_iter, converged=res.converged, primal=res.primal)
    elif kind in ("svc_sq", "svc_hinge"):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            if kind == "svc_sq":
                model = LinearSVC(C=C).fit(X, y)
            else:
                model = LinearSVC(C=C, loss="hinge").fit(X, y)
        out["hit_iteration_limit"] = any("converge" in str(w.message) for w in caught)
        out["hinge_primal"] = hinge_primal(X, y, model.coef_.ravel(), model.intercept_[0], C)
    elif kind == "rbf_exact":
        margin = y * SVC(kernel="rbf", C=C, gamma=1.0 / D).fit(X, y).decision_function(X)
        out["seconds"] = time.perf_counter() - t0
        if opts.get("save_margin"):
            np.save(opts["save_margin"], margin)
    elif kind == "rbf_approx":
        model = fit_rbf_approx(X, y, C, 1.0 / D, n_components=opts["k"], seed=SEED)
        margin = y * model.decision_function(X)
        out.update(gap=model.fit.gap, fit_rows=int(model.fit_rows.size), k=opts["k"])
        if opts.get("compare_with"):
            exact = np.load(opts["compare_with"])
            q = max(1, int(0.05 * n))
            top_e, top_a = set(np.argsort(exact)[:q]), set(np.argsort(margin)[:q])
            out["spearman"] = float(spearmanr(exact, margin).statistic)
            out["top5_overlap"] = len(top_e & top_a) / q
    out.setdefault("seconds", time.perf_counter() - t0)
    out["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    queue.put(out)


def run_case(kind: str, n: int, repeats: int = 1, **opts) -> dict:
    ctx = mp.get_context("spawn")
    runs = []
    for _ in range(repeats):
        queue = ctx.Queue()
        proc = ctx.Process(target=_case, args=(kind, n, opts, queue))
        proc.start()
        result = queue.get()
        proc.join()
        runs.append(result)
    merged = dict(runs[-1])
    merged["seconds"] = statistics.median(r["seconds"] for r in runs)
    merged["peak_rss_mb"] = max(r["peak_rss_mb"] for r in runs)
    merged["repeats"] = repeats
    print(json.dumps(merged), flush=True)
    return merged


def machine_header() -> dict:
    import numpy as np

    try:
        from threadpoolctl import threadpool_info

        blas = [
            {k: i.get(k) for k in ("internal_api", "version", "num_threads", "architecture")}
            for i in threadpool_info()
        ]
    except ImportError:
        blas = "see numpy.show_config()"
    import sklearn

    return {
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scikit_learn": sklearn.__version__,
        "blas": blas,
        "OPENBLAS_CORETYPE": os.environ.get("OPENBLAS_CORETYPE", "(unset)"),
    }


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--smoke", action="store_true", help="tiny sizes, a few seconds")
    ap.add_argument("--out-dir", type=Path, default=HERE / "results")
    args = ap.parse_args(argv)
    args.out_dir.mkdir(parents=True, exist_ok=True)
    if args.smoke:
        lin_sizes, hinge_sizes, reps = [1000, 3000], [1000], 1
        exact_sizes, cmp_n, approx_sizes, k = [500], 500, [2000], 50
    else:
        lin_sizes, hinge_sizes, reps = [10_000, 100_000, 1_000_000], [10_000, 100_000], 3
        exact_sizes, cmp_n, approx_sizes, k = [5_000, 20_000], 20_000, [100_000, 1_000_000], 500

    def rep(n: int) -> int:
        return 1 if n >= 1_000_000 else reps

    linear = []
    for n in lin_sizes:
        ours = run_case("ours_linear", n, rep(n))
        sq = run_case("svc_sq", n, rep(n))
        row = {
            "n": n,
            "ours_s": ours["seconds"],
            "gap": ours["gap"],
            "n_iter": ours["n_iter"],
            "ours_peak_mb": ours["peak_rss_mb"],
            "sq_hinge_s": sq["seconds"],
            "ratio_ours_to_sq": ours["seconds"] / sq["seconds"],
            "repeats": rep(n),
        }
        if n in hinge_sizes:
            hinge = run_case("svc_hinge", n, 1)
            row["hinge_s"] = hinge["seconds"]
            row["hinge_hit_limit"] = hinge["hit_iteration_limit"]
            # How far LinearSVC(loss='hinge') is from our certified hinge optimum (b penalised
            # there, so it cannot reach it exactly).
            row["hinge_primal_excess"] = hinge["hinge_primal"] / ours["primal"] - 1.0
        linear.append(row)

    rbf = []
    margin_file = args.out_dir / f".exact_margin_{os.getpid()}.npy"
    for n in exact_sizes:
        save = str(margin_file) if n == cmp_n else None
        ex = run_case("rbf_exact", n, 1 if n == cmp_n else reps, save_margin=save)
        rbf.append(
            {"method": "exact SVC", "n": n, "s": ex["seconds"], "peak_mb": ex["peak_rss_mb"]}
        )
    ap_cmp = run_case("rbf_approx", cmp_n, reps, k=k, compare_with=str(margin_file))
    margin_file.unlink(missing_ok=True)
    rbf.append(_approx_row(ap_cmp))
    for n in approx_sizes:
        rbf.append(_approx_row(run_case("rbf_approx", n, rep(n), k=k)))

    header = machine_header()
    data = {"machine": header, "smoke": args.smoke, "C": C, "linear": linear, "rbf": rbf}
    (args.out_dir / "solver_speed.json").write_text(json.dumps(data, indent=2))
    (args.out_dir / "solver_speed.md").write_text(render_md(data))
    return 0


def _approx_row(r: dict) -> dict:
    row = {
        "method": f"Nystroem k-means {r['k']} + fit_linear_hinge",
        "n": r["n"],
        "s": r["seconds"],
        "peak_mb": r["peak_rss_mb"],
        "gap": r["gap"],
        "fit_rows": r["fit_rows"],
    }
    for key in ("spearman", "top5_overlap"):
        if key in r:
            row[key] = r[key]
    return row


def render_md(data: dict) -> str:
    m = data["machine"]
    lines = [
        "# Solver speed" + (" (smoke run)" if data["smoke"] else ""),
        "",
        f"- cores: {m['cores']}; Python {m['python']}; numpy {m['numpy']}; "
        f"scikit-learn {m['scikit_learn']}",
        f"- BLAS (threadpoolctl): {json.dumps(m['blas'])}",
        f"- OPENBLAS_CORETYPE: {m['OPENBLAS_CORETYPE']}",
        f"- C = {data['C']}; {D} features, seeded, {NOISE:.0%} labels flipped; times are "
        "wall-clock medians over `reps` runs, each in a fresh child process; peak RSS is "
        "that child's ru_maxrss (includes generating the data).",
        "",
        "## Linear: fit_linear_hinge (hinge, free b, certified gap) vs LinearSVC",
        "",
        "| n | ours s | gap | Newton steps | LinearSVC sq-hinge s | ours / sq-hinge |"
        " LinearSVC hinge s | reps |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for r in data["linear"]:
        hinge = "not run"
        if "hinge_s" in r:
            hinge = f"{r['hinge_s']:.2f}, primal {r['hinge_primal_excess']:+.1e} vs ours"
            if r["hinge_hit_limit"]:
                hinge += " (hit iteration limit)"
        lines.append(
            f"| {r['n']:,} | {r['ours_s']:.3f} | {r['gap']:.1e} | {r['n_iter']} | "
            f"{r['sq_hinge_s']:.3f} | {r['ratio_ours_to_sq']:.2f} | {hinge} | {r['repeats']} |"
        )
    lines += [
        "",
        "LinearSVC's default minimises the squared hinge with a penalised intercept, a different",
        "objective; it is the speed yardstick only. LinearSVC(loss='hinge') is run at 10k and",
        "100k only: at 1M it needs about 2 minutes here and still stops at its iteration limit.",
        "",
        "## RBF (gamma = 1/20): exact SVC vs the Nystroem approximation",
        "",
        "| method | n | s | peak RSS MB | gap | rows fitted | Spearman vs exact | top-5% overlap |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for r in data["rbf"]:
        gap = f"{r['gap']:.1e}" if "gap" in r else ""
        rho = f"{r['spearman']:.3f}" if "spearman" in r else ""
        top = f"{r['top5_overlap']:.3f}" if "top5_overlap" in r else ""
        fitted = f"{r['fit_rows']:,}" if "fit_rows" in r else ""
        lines.append(
            f"| {r['method']} | {r['n']:,} | {r['s']:.2f} | {r['peak_mb']:.0f} | {gap} | "
            f"{fitted} | {rho} | {top} |"
        )
    lines += [
        "",
        "Agreement is on the margin y*f over all rows of the comparison set (Spearman rank",
        "correlation, and the share of the exact fit's 5% lowest-margin rows that the",
        "approximation also puts in its lowest 5%).",
        "",
    ]
    return "\n".join(lines)


if __name__ == "__main__":
    sys.exit(main())
