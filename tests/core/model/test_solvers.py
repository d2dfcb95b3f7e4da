"""Checks of the large-table solvers against scikit-learn's exact SVC and duality theory."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import spearmanr
from sklearn.datasets import load_breast_cancer
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC

from reviewer.core.errors import SettingsError
from reviewer.core.model.solvers import (
    dual_objective,
    fit_linear_hinge,
    fit_rbf_approx,
    hinge_primal,
    project_alpha_feasible,
)

ROOT = Path(__file__).resolve().parents[3]


@pytest.fixture(scope="module")
def cancer() -> tuple[np.ndarray, np.ndarray]:
    # scikit-learn's bundled breast-cancer data (569 rows, 30 features), standardised.
    X, t = load_breast_cancer(return_X_y=True)
    return StandardScaler().fit_transform(X), np.where(t == 1, 1.0, -1.0)


def noisy_linear(n: int, d: int = 5, noise: float = 0.08, seed: int = 1):
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((n, d))
    y = np.where(X @ rng.standard_normal(d) + 0.4 > 0, 1.0, -1.0)
    y[rng.random(n) < noise] *= -1
    return X, y


def svc_linear(X, y, C, class_weight=None):
    # scikit-learn's SVC(kernel='linear') is LIBSVM (Chang & Lin 2011): same primal, b free.
    svc = SVC(kernel="linear", C=C, tol=1e-8, class_weight=class_weight).fit(X, y)
    return svc.coef_.ravel(), float(svc.intercept_[0])


@pytest.mark.parametrize("C", [0.05, 1.0])
def test_linear_matches_libsvm_on_breast_cancer(cancer, C):
    X, y = cancer
    res = fit_linear_hinge(X, y, C, tol=1e-6)
    w_ref, b_ref = svc_linear(X, y, C)
    p_ref = hinge_primal(X, y, w_ref, b_ref, C)
    # Reference: scikit-learn SVC(kernel='linear') primal value, relative 1e-3.
    assert res.primal == pytest.approx(p_ref, rel=1e-3)
    assert res.primal <= p_ref * (1 + 1e-6)
    # Reference: SVC's coef_ and intercept_. Measured relative w error 1.5e-5 (C=0.05) and
    # 5e-6 (C=1); tolerance 1e-3 of ||w|| and of max(1, |b|).
    scale = np.linalg.norm(w_ref)
    assert np.linalg.norm(res.w - w_ref) <= 1e-3 * scale
    assert abs(res.b - b_ref) <= 1e-3 * max(1.0, abs(b_ref))
    assert res.converged and res.gap <= 1e-6


def test_gap_certificate_is_honest(cancer):
    X, y = cancer
    C = 1.0
    res = fit_linear_hinge(X, y, C, tol=1e-3)
    # Weak duality (Cortes & Vapnik 1995): dual of a feasible alpha <= primal of any (w, b).
    assert np.all(res.alpha >= 0) and np.all(res.alpha <= C + 1e-12)
    assert abs(res.alpha @ y) <= 1e-9 * res.alpha.sum()
    assert res.dual == pytest.approx(dual_objective(X, y, res.alpha), rel=1e-12)
    assert res.primal == pytest.approx(hinge_primal(X, y, res.w, res.b, C), rel=1e-12)
    assert res.gap == pytest.approx((res.primal - res.dual) / res.primal, rel=1e-9)
    assert 0 <= res.gap <= 1e-3
    w_ref, b_ref = svc_linear(X, y, C)
    p_ref = hinge_primal(X, y, w_ref, b_ref, C)
    # The optimum (SVC's primal, LIBSVM) lies between our dual and primal values.
    assert res.dual <= p_ref * (1 + 1e-7)
    assert res.primal >= p_ref * (1 - 1e-7)


def test_kkt_ties_alpha_to_margins():
    X, y = noisy_linear(400)
    C = 1.0
    res = fit_linear_hinge(X, y, C, tol=1e-6)
    m = y * (X @ res.w + res.b)
    # KKT for the soft-margin SVM (Cortes & Vapnik 1995): m < 1 -> alpha = C, m > 1 -> 0,
    # 0 < alpha < C -> m = 1. Tolerance: the final smoothing width plus 1e-3.
    band = res.smoothing + 1e-3
    assert np.allclose(res.alpha[m < 1 - band], C)
    assert np.all(res.alpha[m > 1 + band] == 0)
    free = (res.alpha > 1e-9 * C) & (res.alpha < C * (1 - 1e-9))
    assert np.all(np.abs(m[free] - 1) <= band)
    # Stationarity: w = sum alpha_i y_i x_i.
    w_alpha = X.T @ (res.alpha * y)
    assert np.linalg.norm(w_alpha - res.w) <= 1e-2 * np.linalg.norm(res.w)


def test_class_weights_match_libsvm():
    X, y = noisy_linear(300, seed=3)
    C = 0.5
    cw = {1.0: 3.0, -1.0: 0.7}
    s = np.where(y > 0, cw[1.0], cw[-1.0])
    res = fit_linear_hinge(X, y, C, sample_weight=s, tol=1e-6)
    w_ref, b_ref = svc_linear(X, y, C, class_weight=cw)
    # Reference: SVC(class_weight=...) scales C per class (LIBSVM -wi), i.e. s_i = weight.
    assert res.primal == pytest.approx(hinge_primal(X, y, w_ref, b_ref, C, s), rel=1e-3)
    assert np.linalg.norm(res.w - w_ref) <= 2e-2 * np.linalg.norm(w_ref)
    assert res.b == pytest.approx(b_ref, abs=2e-2 * max(1.0, abs(b_ref)))
    assert np.all(res.alpha <= C * s + 1e-12)
    # Unweighted fit must differ, else the weights were ignored.
    plain = fit_linear_hinge(X, y, C, tol=1e-6)
    assert abs(plain.b - res.b) > 1e-2


def test_warm_start_is_not_worse():
    X, y = noisy_linear(2000, d=8)
    first = fit_linear_hinge(X, y, 2.0, tol=1e-3)
    again = fit_linear_hinge(X, y, 2.0, tol=1e-3, init=(first.w, first.b))
    assert again.converged and again.n_iter <= first.n_iter


def test_projection_restores_equality_and_box():
    rng = np.random.default_rng(0)
    y = np.where(rng.random(200) < 0.3, 1.0, -1.0)
    upper = rng.uniform(0.5, 2.0, 200)
    a = project_alpha_feasible(rng.uniform(0, 2.0, 200), y, upper)
    assert abs(a @ y) <= 1e-9 * a.sum()
    assert np.all(a >= 0) and np.all(a <= upper)


def test_bad_settings_raise_our_error():
    X, y = noisy_linear(20)
    with pytest.raises(SettingsError, match="C must be"):
        fit_linear_hinge(X, y, -1.0)
    with pytest.raises(SettingsError, match="labels must be"):
        fit_linear_hinge(X, np.where(y > 0, 1.0, 0.0), 1.0)
    with pytest.raises(SettingsError, match="gamma"):
        fit_rbf_approx(X, y, 1.0, 0.0)


def test_rbf_approximation_ranks_like_exact_svc(cancer):
    X, y = cancer
    gamma = 1.0 / X.shape[1]
    exact = SVC(kernel="rbf", C=1.0, gamma=gamma).fit(X, y)
    m_exact = y * exact.decision_function(X)
    approx = fit_rbf_approx(X, y, 1.0, gamma, n_components=100, seed=0)
    m_approx = y * approx.decision_function(X)
    # Reference: scikit-learn SVC(kernel='rbf') on its bundled breast-cancer data.
    # Measured Spearman 0.990 and top-5% overlap 0.89 (25 of 28 rows); floors set below.
    rho = spearmanr(m_exact, m_approx).statistic
    q = int(0.05 * len(y))
    overlap = len(set(np.argsort(m_exact)[:q]) & set(np.argsort(m_approx)[:q])) / q
    assert rho >= 0.95
    assert overlap >= 0.75
    assert approx.fit.gap <= 1e-3


def test_rbf_subsample_path_and_chunking():
    X, y = noisy_linear(3000, d=4)
    model = fit_rbf_approx(X, y, 1.0, 0.25, n_components=40, max_fit_rows=1000, chunk_rows=256)
    assert model.fit_rows.size <= 1001
    f = model.decision_function(X)
    # Chunking must not change the values.
    model.chunk_rows = 10_000
    assert np.allclose(f, model.decision_function(X))
    # The fitted map still separates a near-linear problem (92% clean labels).
    assert np.mean(np.sign(f) == y) >= 0.85


def test_benchmark_smoke_mode_writes_results(tmp_path):
    script = ROOT / "tests" / "benchmarks" / "solver_speed.py"
    proc = subprocess.run(
        [sys.executable, str(script), "--smoke", "--out-dir", str(tmp_path)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr
    md = (tmp_path / "solver_speed.md").read_text()
    data = json.loads((tmp_path / "solver_speed.json").read_text())
    assert "cores" in md and data["linear"] and data["rbf"]
    assert all(row["gap"] <= 1e-3 for row in data["linear"])
