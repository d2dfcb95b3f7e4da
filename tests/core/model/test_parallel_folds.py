"""Held-out folds give the same values wherever they run: one thread, several, other processes.

Also: warm-started fold fits reach the same certified gap and margins as cold ones.
"""

from __future__ import annotations

import functools
import threading

import numpy as np
import pytest

from reviewer.core.errors import Cancelled, SettingsError
from reviewer.core.model import parallel
from reviewer.core.model.engine import SoftMarginClassifier, fit_binary
from reviewer.core.model.fitting import fit_margins, warm_start
from reviewer.core.model.heldout import heldout_decision
from reviewer.core.values import FitSettings


def _table(n: int, k: int = 3, d: int = 6, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    centres = rng.normal(scale=1.5, size=(k, d))
    X = centres[y] + rng.normal(size=(n, d))
    flip = rng.random(n) < 0.05
    y[flip] = (y[flip] + 1) % k
    return X, y


CASES = {
    # 2,000 rows at C=10: the primal Newton solver (choose_solver); warm-started from the full fit.
    "linear primal": (2000, SoftMarginClassifier(kernel="linear", C=10.0), True),
    # 300 rows: LIBSVM's exact dual.
    "linear exact": (300, SoftMarginClassifier(kernel="linear", C=1.0), False),
    "rbf": (300, SoftMarginClassifier(kernel="rbf", C=3.0, gamma=0.2), False),
}


@pytest.mark.parametrize("case", list(CASES))
def test_two_jobs_give_the_serial_held_out_values(case: str) -> None:
    n, estimator, warm = CASES[case]
    X, y = _table(n)
    init = warm_start(SoftMarginClassifier(**estimator.get_params()).fit(X, y)) if warm else None
    if warm:
        assert init is not None  # the primal path really is warm-started here
    runs = {
        jobs: heldout_decision(X, y, 3, estimator, 5, seed=4, jobs=jobs, warm_start=init)[0]
        for jobs in (1, 2)
    }
    assert np.isfinite(runs[1]).all()
    np.testing.assert_allclose(runs[2], runs[1], rtol=0, atol=1e-9)


def _rows_to_features(X: np.ndarray, calls: list, train: np.ndarray, test: np.ndarray):
    """A fold-feature builder as a dataset's would be: features learned from train rows only."""
    calls.append(len(train))
    mean = X[train].mean(axis=0)
    return X[train] - mean, X[test] - mean


def test_fold_features_closure_travels_to_threads_and_processes() -> None:
    X, y = _table(400)
    calls: list = []
    builder = functools.partial(_rows_to_features, X, calls)
    est = SoftMarginClassifier(kernel="linear", C=1.0)
    serial, _ = heldout_decision(X, y, 3, est, 4, seed=1, jobs=1, fold_features=builder)
    assert len(calls) == 4  # one feature build per fold
    threads, _ = heldout_decision(X, y, 3, est, 4, seed=1, jobs=2, fold_features=builder)
    np.testing.assert_allclose(threads, serial, rtol=0, atol=1e-9)

    # Processes (joblib's loky, which pickles with cloudpickle as Dask does): a closure
    # defined here, over local state.
    shift = X.mean(axis=0)

    def closure(train, test):
        return X[train] - shift, X[test] - shift

    local, _ = heldout_decision(X, y, 3, est, 4, seed=1, jobs=1, fold_features=closure)
    old = parallel.LOCAL_BACKEND
    parallel.LOCAL_BACKEND = "loky"
    try:
        far, _ = heldout_decision(X, y, 3, est, 4, seed=1, jobs=2, fold_features=closure)
    finally:
        parallel.LOCAL_BACKEND = old
    np.testing.assert_allclose(far, local, rtol=0, atol=1e-9)


def test_fit_margins_gives_the_same_ranking_for_any_jobs() -> None:
    X, y = _table(900)
    labels = np.array([f"grade {v}" for v in y], dtype=object)
    settings = FitSettings(kernel="linear", C=5.0, folds=5)
    one = fit_margins(X, labels, settings, jobs=1).rows
    two = fit_margins(X, labels, settings, jobs=2).rows
    np.testing.assert_allclose(two["heldout_margin"], one["heldout_margin"], rtol=0, atol=1e-9)
    assert (two["rank"].to_numpy() == one["rank"].to_numpy()).all()


def test_cancel_stops_parallel_folds() -> None:
    X, y = _table(300)
    cancel = threading.Event()
    cancel.set()
    from reviewer.core.progress import Reporter

    with pytest.raises(Cancelled):
        heldout_decision(
            X, y, 3, SoftMarginClassifier(kernel="linear"), 5, 0, Reporter(None, cancel), jobs=2
        )


def test_a_warm_start_reaches_the_cold_fits_gap_and_margins() -> None:
    X, y = _table(3000, k=2, d=12, seed=3)
    ypm = np.where(y == 1, 1.0, -1.0)
    full = fit_binary(X, ypm, 10.0, kernel="linear", solver="approximate")
    fold = np.arange(len(y)) % 5 != 0
    cold = fit_binary(X[fold], ypm[fold], 10.0, kernel="linear", solver="approximate")
    warm = fit_binary(
        X[fold],
        ypm[fold],
        10.0,
        kernel="linear",
        solver="approximate",
        init=(full.w, full.intercept),
    )
    assert cold.converged and warm.converged
    gap = (warm.primal - warm.dual) / abs(warm.primal)
    assert gap <= 1e-3  # the solver's certified relative gap (solvers.fit_linear_hinge's tol)
    # Both are within a relative gap of 1e-3 of the same optimum, so their objective values
    # agree to that tolerance, and so do the held-out rows' decision values (to its scale).
    assert warm.primal == pytest.approx(cold.primal, rel=2e-3)
    test = ~fold
    f_cold = X[test] @ cold.w + cold.intercept
    f_warm = X[test] @ warm.w + warm.intercept
    assert np.max(np.abs(f_warm - f_cold)) < 0.05 * np.max(np.abs(f_cold))


@pytest.mark.parametrize("jobs", [0, -1, 1.5, True, "2"])
def test_bad_jobs_are_refused(jobs) -> None:
    with pytest.raises(SettingsError, match="jobs"):
        parallel.resolve_jobs(jobs)


@pytest.mark.parametrize("address", ["localhost:8786", "http://x:1", "tcp://", "", "tcp://a b:1"])
def test_a_malformed_cluster_address_is_refused_before_any_work(address: str) -> None:
    with pytest.raises(SettingsError, match="tcp://"):
        parallel.check_address(address)


def test_the_default_is_every_usable_core() -> None:
    assert parallel.resolve_jobs(None) == parallel.usable_cores() >= 1


def test_sparse_folds_over_the_memory_budget_run_one_at_a_time(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from scipy import sparse

    from reviewer.core.model import heldout

    dense, y = _table(400)
    X = sparse.csr_matrix(np.where(np.abs(dense) > 0.5, dense, 0.0))
    where: dict[str, set] = {}

    def builder(tag: str, train: np.ndarray, test: np.ndarray):
        where.setdefault(tag, set()).add(threading.current_thread() is threading.main_thread())
        return X[train], X[test]

    est = SoftMarginClassifier(kernel="linear", C=1.0)
    stored = X.data.nbytes + X.indices.nbytes + X.indptr.nbytes
    monkeypatch.setattr(heldout, "SPARSE_FOLDS_MEMORY", 2 * stored)  # two folds fit
    both, _ = heldout_decision(
        X, y, 3, est, 4, seed=1, jobs=2, fold_features=functools.partial(builder, "two")
    )
    monkeypatch.setattr(heldout, "SPARSE_FOLDS_MEMORY", 2 * stored - 1)  # only one does
    one, _ = heldout_decision(
        X, y, 3, est, 4, seed=1, jobs=2, fold_features=functools.partial(builder, "one")
    )
    assert where == {"two": {False}, "one": {True}}  # worker threads, then the caller's
    np.testing.assert_allclose(one, both, rtol=0, atol=1e-9)
    assert heldout.fold_jobs(dense, 2) == 2  # dense folds keep every core asked for
