"""The margin engine checked against outside references.

References used (each named again beside its check):

* scikit-learn's SVC, i.e. LIBSVM (Chang & Lin 2011, ACM TIST 2(3)), fitted here independently
  with a much tighter stopping tolerance than the engine uses;
* SciPy's SLSQP optimiser (scipy.optimize.minimize) solving the soft-margin dual directly;
* the Karush-Kuhn-Tucker conditions and the slack bound of Cortes & Vapnik 1995 ("Support-vector
  networks", Machine Learning 20);
* datasets bundled with scikit-learn: Fisher's iris, Wisconsin breast cancer, optical digits.

Tolerances: the engine runs LIBSVM with its stopping tolerance 1e-4 on the dual gradient, so
decision values and margins are compared to 1e-3 absolute, alphas to 5e-3 * C, and KKT
conditions are held to 1e-3 in margin units. Identities that need no solver (w = sum a y x,
sum a y = 0) are held to 1e-8.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize
from sklearn.datasets import load_breast_cancer, load_digits, load_iris, make_classification
from sklearn.metrics import roc_auc_score
from sklearn.model_selection import StratifiedKFold
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC

from reviewer.core.model.engine import (
    SoftMarginClassifier,
    fit_binary,
    resolve_gamma,
    support_kinds,
)
from reviewer.core.model.fitting import fit_margins
from reviewer.core.values import FitSettings

DECISION_ATOL = 1e-3
KKT_TOL = 1e-3
EXACT_ATOL = 1e-8


def _binary_data(n: int = 200, seed: int = 1, flip: float = 0.1) -> tuple[np.ndarray, np.ndarray]:
    X, y = make_classification(
        n_samples=n, n_features=5, n_informative=3, flip_y=flip, random_state=seed
    )
    return StandardScaler().fit_transform(X), np.where(y == 1, 1.0, -1.0)


def _reference_svc(X, ypm, C, kernel, **kw) -> SVC:
    # scikit-learn's SVC (LIBSVM, Chang & Lin 2011) at a tight tolerance: the outside answer.
    return SVC(kernel=kernel, C=C, gamma="scale", tol=1e-8, **kw).fit(X, ypm)


def _reference_alpha(svc: SVC, n: int) -> np.ndarray:
    alpha = np.zeros(n)
    alpha[svc.support_] = np.abs(svc.dual_coef_[0])
    return alpha


def _kernel(X: np.ndarray, kernel: str, gamma: float) -> np.ndarray:
    if kernel == "linear":
        return X @ X.T
    sq = np.sum((X[:, None, :] - X[None, :, :]) ** 2, axis=-1)
    return np.exp(-gamma * sq)


# --- scikit-learn's SVC (LIBSVM) on the same features ------------------------------------------


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
@pytest.mark.parametrize("C", [0.1, 1.0, 10.0])
def test_fit_binary_matches_libsvm(kernel: str, C: float) -> None:
    X, ypm = _binary_data(n=240)
    gamma = resolve_gamma("scale", X)
    fit = fit_binary(X, ypm, C, kernel=kernel, gamma=gamma)
    ref = _reference_svc(X, ypm, C, kernel)  # reference: scikit-learn SVC / LIBSVM
    f_ref = ref.decision_function(X)
    margin_ref = ypm * f_ref
    slack_ref = np.maximum(0.0, 1.0 - margin_ref)
    np.testing.assert_allclose(ypm * fit.decision, margin_ref, atol=DECISION_ATOL)
    np.testing.assert_allclose(np.maximum(0.0, 1 - ypm * fit.decision), slack_ref, atol=1e-3)
    np.testing.assert_allclose(fit.alpha, _reference_alpha(ref, len(ypm)), atol=5e-3 * C)
    assert fit.intercept == pytest.approx(float(ref.intercept_[0]), abs=DECISION_ATOL)
    if kernel == "linear":
        np.testing.assert_allclose(fit.w, ref.coef_[0], atol=DECISION_ATOL * 10)


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
def test_multiclass_problems_match_libsvm_one_against_rest(kernel: str) -> None:
    # Fisher's iris as bundled with scikit-learn (sklearn.datasets.load_iris), 150 rows, 3 classes.
    iris = load_iris()
    X = StandardScaler().fit_transform(iris.data)
    labels = iris.target_names[iris.target]
    model = SoftMarginClassifier(kernel=kernel, C=1.0, gamma="scale").fit(X, labels)
    if kernel != "linear":  # a linear fit has no gamma to resolve
        # 'scale' is 1 / (n_features * X.var()) in scikit-learn's SVC documentation.
        assert model.gamma_ == pytest.approx(1.0 / (X.shape[1] * X.var()))
    F = model.decision_function(X)
    for k, cls in enumerate(model.classes_):
        ypm = np.where(labels == cls, 1.0, -1.0)
        ref = _reference_svc(X, ypm, 1.0, kernel)  # reference: scikit-learn SVC / LIBSVM
        np.testing.assert_allclose(F[:, k], ref.decision_function(X), atol=DECISION_ATOL)
        np.testing.assert_allclose(
            model.problems_[k].alpha, _reference_alpha(ref, len(ypm)), atol=5e-3
        )


def test_balanced_class_weights_match_libsvm() -> None:
    X, ypm = _binary_data(n=200, seed=4)
    keep = np.flatnonzero((ypm > 0) | (np.arange(len(ypm)) % 3 == 0))  # unbalance the classes
    X, ypm = X[keep], ypm[keep]
    labels = np.where(ypm > 0, "pos", "neg")
    model = SoftMarginClassifier(kernel="linear", C=1.0, class_weight="balanced").fit(X, labels)
    # reference: scikit-learn SVC with class_weight="balanced" (n / (K * n_class) per class)
    ref = _reference_svc(X, ypm, 1.0, "linear", class_weight="balanced")
    np.testing.assert_allclose(model.decision_function(X), ref.decision_function(X), atol=1e-3)
    upper = model.problems_[0].upper
    counts = {c: np.sum(ypm == c) for c in (-1.0, 1.0)}
    expected = np.array([len(ypm) / (2 * counts[v]) for v in ypm])
    np.testing.assert_allclose(upper, expected)


# --- SciPy's optimiser on the dual; strong duality ----------------------------------------------


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
@pytest.mark.parametrize("C", [0.5, 5.0])
def test_dual_objective_matches_scipy_solve(kernel: str, C: float) -> None:
    X, ypm = _binary_data(n=40, seed=7, flip=0.15)
    gamma = resolve_gamma("scale", X)
    Q = np.outer(ypm, ypm) * _kernel(X, kernel, gamma)

    # Independent solve with SciPy's SLSQP (scipy.optimize.minimize): maximise
    # sum a - 1/2 a'Qa subject to sum a_i y_i = 0 and 0 <= a_i <= C.
    res = minimize(
        lambda a: 0.5 * a @ Q @ a - a.sum(),
        np.zeros(len(ypm)),
        jac=lambda a: Q @ a - 1.0,
        method="SLSQP",
        bounds=[(0.0, C)] * len(ypm),
        constraints=[{"type": "eq", "fun": lambda a: a @ ypm, "jac": lambda a: ypm}],
        options={"ftol": 1e-12, "maxiter": 2000},
    )
    assert res.success, res.message
    scipy_dual = -res.fun

    fit = fit_binary(X, ypm, C, kernel=kernel, gamma=gamma)
    # The engine's dual, recomputed here from its alphas and the kernel matrix.
    own_dual = fit.alpha.sum() - 0.5 * fit.alpha @ Q @ fit.alpha
    assert fit.dual == pytest.approx(own_dual, rel=1e-6)
    assert fit.dual == pytest.approx(scipy_dual, rel=1e-5)
    # Strong duality for this convex quadratic problem: primal = dual at the optimum; the gap
    # left by LIBSVM's 1e-4 stopping rule was ~1e-6 relative when measured.
    assert fit.primal == pytest.approx(fit.dual, rel=1e-4)
    assert fit.primal >= fit.dual - 1e-9  # weak duality holds exactly


def test_primal_recomputed_from_weights() -> None:
    X, ypm = _binary_data(n=150, seed=3)
    C = 2.0
    fit = fit_binary(X, ypm, C, kernel="linear")
    # 1/2 ||w||^2 + C sum max(0, 1 - y f), the soft-margin primal of Cortes & Vapnik 1995.
    f = X @ fit.w + fit.intercept
    primal = 0.5 * fit.w @ fit.w + C * np.maximum(0.0, 1 - ypm * f).sum()
    assert fit.primal == pytest.approx(primal, rel=1e-6)


# --- Karush-Kuhn-Tucker conditions --------------------------------------------------------------


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
@pytest.mark.parametrize("C", [0.1, 1.0, 20.0])
def test_kkt_conditions(kernel: str, C: float) -> None:
    X, ypm = _binary_data(n=200, seed=11)
    fit = fit_binary(X, ypm, C, kernel=kernel, gamma=resolve_gamma("scale", X))
    m = ypm * fit.decision
    kind = support_kinds(fit.alpha, fit.upper)
    # KKT for the soft-margin dual (Cortes & Vapnik 1995; any SVM text), tolerance KKT_TOL:
    assert np.all(m[kind == "non_support"] >= 1 - KKT_TOL)  # alpha = 0  => margin >= 1
    assert np.all(np.abs(m[kind == "margin_support"] - 1) <= KKT_TOL)  # 0 < alpha < C => = 1
    assert np.all(m[kind == "bound_support"] <= 1 + KKT_TOL)  # alpha = C  => margin <= 1
    assert (kind != "").all()
    assert abs(np.sum(fit.alpha * ypm)) <= EXACT_ATOL * max(1.0, C * len(ypm))
    assert np.all((fit.alpha >= 0) & (fit.alpha <= fit.upper * (1 + 1e-12)))
    if kernel == "linear":
        # Stationarity: w = sum_i alpha_i y_i x_i.
        np.testing.assert_allclose(fit.w, (fit.alpha * ypm) @ X, atol=1e-6 * max(1.0, C))


@pytest.mark.parametrize("kernel", ["linear", "rbf"])
def test_kkt_ties_support_kind_to_zone(kernel: str) -> None:
    # KKT (Cortes & Vapnik 1995): a row with alpha below C has margin >= 1, hence slack 0 and
    # zone clear; a row with positive slack must be at the bound alpha = C.
    X, ypm = _binary_data(n=200, seed=12, flip=0.15)
    labels = np.where(ypm > 0, "b", "a").astype(object)
    rows = fit_margins(X, labels, FitSettings(kernel=kernel, C=1.0, folds=0)).rows
    below_bound = rows["support"].isin(["non_support", "margin_support"])
    assert (rows.loc[below_bound, "zone"] == "clear").all()
    assert (rows.loc[rows["zone"] != "clear", "support"] == "bound_support").all()
    assert (rows["zone"] == "wrong_side").sum() > 0  # the flipped rows make the check bite


# --- Cortes & Vapnik 1995: sum of slacks bounds the training errors -----------------------------


@pytest.mark.parametrize("seed", [0, 5])
@pytest.mark.parametrize("C", [0.01, 1.0, 100.0])
@pytest.mark.parametrize("kernel", ["linear", "rbf"])
def test_rows_past_the_boundary_never_exceed_sum_of_slack(seed: int, C: float, kernel: str) -> None:
    X, ypm = _binary_data(n=180, seed=seed, flip=0.2)
    labels = np.where(ypm > 0, "b", "a").astype(object)
    result = fit_margins(X, labels, FitSettings(kernel=kernel, C=C, folds=0))
    slack = result.rows["slack"].to_numpy()
    # Cortes & Vapnik 1995: #{xi_i > 1} <= sum_i xi_i (each such row contributes more than 1).
    assert np.sum(slack > 1) <= slack.sum() + 1e-9
    assert result.summary.sum_slack == pytest.approx(slack.sum())
    assert result.summary.zone_counts["wrong_side"] == int(np.sum(slack > 1))


# --- Fisher's iris: what is separable and what is not ------------------------------------------


def _iris_pair(positive: str, negative: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
    iris = load_iris()  # Fisher's iris as bundled with scikit-learn
    names = iris.target_names[iris.target]
    keep = np.isin(names, (positive, *negative))
    X = StandardScaler().fit_transform(iris.data[keep])
    return X, np.where(names[keep] == positive, positive, "rest").astype(object)


def test_iris_setosa_is_linearly_separable() -> None:
    # scikit-learn's iris description (after Fisher 1936): "One class is linearly separable
    # from the other 2". A hard-ish margin (C = 1e4) must leave every slack at 0 (tol 1e-3).
    X, labels = _iris_pair("setosa", ("versicolor", "virginica"))
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1e4, folds=0))
    slack = result.rows["slack"].to_numpy()
    assert slack.max() <= 1e-3
    assert result.summary.zone_counts["clear"] == 150


def test_iris_versicolor_virginica_overlap() -> None:
    # Same description: "the latter are NOT linearly separable from each other".
    X, labels = _iris_pair("versicolor", ("virginica",))
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1e4, folds=0))
    slack = result.rows["slack"].to_numpy()
    assert slack.max() > 0.1
    assert result.summary.zone_counts["clear"] < 100


# --- Margin definitions ------------------------------------------------------------------------


def test_multiclass_margin_is_own_minus_best_rival() -> None:
    iris = load_iris()  # scikit-learn's bundled iris, 3 classes
    X = StandardScaler().fit_transform(iris.data)
    labels = iris.target_names[iris.target].astype(object)
    result = fit_margins(X, labels, FitSettings(kernel="rbf", C=1.0, folds=0))
    F = result.model.decision_function(X)
    y = np.searchsorted(result.model.classes_, labels.astype(str))
    own = F[np.arange(len(y)), y]
    rivals = F.copy()
    rivals[np.arange(len(y)), y] = -np.inf
    expected = own - rivals.max(axis=1)  # m = f_y - max_{k != y} f_k
    np.testing.assert_allclose(result.rows["margin"].to_numpy(), expected, atol=1e-9)
    np.testing.assert_allclose(
        result.rows["slack"].to_numpy(), np.maximum(0.0, 1 - expected), atol=1e-9
    )


def test_binary_margin_is_label_times_decision() -> None:
    X, ypm = _binary_data(n=160, seed=2)
    labels = np.where(ypm > 0, "yes", "no").astype(object)  # classes sort as (no, yes)
    result = fit_margins(X, labels, FitSettings(kernel="rbf", C=3.0, folds=0))
    f = result.model.decision_function(X)
    np.testing.assert_allclose(result.rows["margin"].to_numpy(), ypm * f, atol=1e-9)
    # and f itself is LIBSVM's decision value (scikit-learn SVC), within the solver tolerance
    ref = _reference_svc(X, ypm, 3.0, "rbf")
    np.testing.assert_allclose(f, ref.decision_function(X), atol=DECISION_ATOL)


# --- Held-out margins ----------------------------------------------------------------------------


def _ovr_margins(X_tr, y_tr, X_te, y_te, classes, C) -> np.ndarray:
    """Margins of held-out rows from scikit-learn SVCs fitted one class against the rest."""
    if len(classes) == 2:
        ref = _reference_svc(X_tr, np.where(y_tr == classes[1], 1.0, -1.0), C, "linear")
        return np.where(y_te == classes[1], 1.0, -1.0) * ref.decision_function(X_te)
    F = np.column_stack(
        [
            _reference_svc(X_tr, np.where(y_tr == c, 1.0, -1.0), C, "linear").decision_function(
                X_te
            )
            for c in classes
        ]
    )
    y = np.searchsorted(classes, y_te)
    own = F[np.arange(len(y)), y]
    F[np.arange(len(y)), y] = -np.inf
    return own - F.max(axis=1)


@pytest.mark.parametrize("multiclass", [False, True])
def test_heldout_margin_equals_model_fitted_without_the_fold(multiclass: bool) -> None:
    seed = 3
    if multiclass:
        iris = load_iris()
        X = StandardScaler().fit_transform(iris.data)
        labels = iris.target_names[iris.target].astype(object)
    else:
        X, ypm = _binary_data(n=200, seed=8)
        labels = np.where(ypm > 0, "b", "a").astype(object)
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=5, seed=seed))
    held = result.rows["heldout_margin"].to_numpy()
    assert np.isfinite(held).all()
    classes, y_idx = np.unique(labels.astype(str), return_inverse=True)
    # The fold layout: scikit-learn's StratifiedKFold with the same seed, shuffled.
    splits = StratifiedKFold(n_splits=5, shuffle=True, random_state=seed).split(X, y_idx)
    for fold, (train, test) in enumerate(splits):
        if fold > 1:
            break
        expected = _ovr_margins(
            X[train], labels[train].astype(str), X[test], labels[test].astype(str), classes, 1.0
        )
        np.testing.assert_allclose(held[test], expected, atol=DECISION_ATOL)
    # A held-out margin is what an unseen row gets; it should not flatter the training fit.
    assert np.mean(held) <= np.mean(result.rows["margin"].to_numpy()) + 1e-9


def test_no_folds_leaves_heldout_columns_empty() -> None:
    X, ypm = _binary_data(n=120, seed=9)
    labels = np.where(ypm > 0, "b", "a").astype(object)
    result = fit_margins(X, labels, FitSettings(kernel="linear", C=1.0, folds=0))
    assert result.rows["heldout_margin"].isna().all()
    assert result.rows["heldout_slack"].isna().all()
    # with no held-out values the score falls back to the training margin
    np.testing.assert_allclose(result.rows["score"], -result.rows["margin"])


# --- Flipped labels in scikit-learn's bundled data rank first ----------------------------------


def _flip(y: np.ndarray, n_classes: int, share: float, seed: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    flipped = rng.random(len(y)) < share
    noisy = y.copy()
    shift = rng.integers(1, n_classes, size=len(y))  # always a different class
    noisy[flipped] = (y[flipped] + shift[flipped]) % n_classes
    return noisy, flipped


def test_flipped_labels_rank_first_breast_cancer() -> None:
    # Wisconsin breast cancer as bundled with scikit-learn (load_breast_cancer), 569 rows.
    data = load_breast_cancer()
    X = StandardScaler().fit_transform(data.data)
    noisy, flipped = _flip(data.target, 2, 0.10, seed=0)
    labels = data.target_names[noisy].astype(object)
    result = fit_margins(X, labels, FitSettings())
    auroc = roc_auc_score(flipped, result.rows["score"].to_numpy())
    # Measured 0.995 (auto chose rbf, C=1; 51 of 569 flipped); chance is 0.5.
    assert auroc >= 0.97, auroc


def test_flipped_labels_rank_first_digits() -> None:
    # Optical handwritten digits as bundled with scikit-learn (load_digits); first 800 rows.
    data = load_digits()
    X = StandardScaler().fit_transform(data.data[:800])
    noisy, flipped = _flip(data.target[:800], 10, 0.10, seed=1)
    labels = noisy.astype(str).astype(object)
    result = fit_margins(X, labels, FitSettings())
    auroc = roc_auc_score(flipped, result.rows["score"].to_numpy())
    # Measured 0.999 (auto chose rbf, C=10; 74 of 800 flipped); chance is 0.5.
    assert auroc >= 0.97, auroc
