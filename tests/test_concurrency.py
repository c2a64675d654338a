"""GridSearchCV over each estimator: loky processes and threads vs serial.

The claim checked: a grid search runs to completion under joblib's process
(loky) and threading backends with two workers, and its results equal the
serial run's. Every fit is a deterministic function of its fold (no random
state), so the only possible source of difference is the order of floating
point sums, and that was measured:

- threads, and processes on small data: EXACTLY equal (every number bit
  for bit);
- processes on data large enough for OpenBLAS to split a dot product or
  matrix-vector product across its threads (the 24,000-row case): loky
  limits each worker's BLAS to cpu_count // n_jobs = 1 thread while the
  parent uses 2, and the cross-validated log-loss then differs in the last
  bit (measured 1.4e-16 relative). With the serial run's BLAS limited to
  one thread as well (threadpoolctl) the results are exactly equal again,
  which pins the cause on BLAS threading, not on the estimators; the
  numba kernels' thread count makes no difference (rows are reduced
  within one thread). The comparison with the unrestricted serial run uses
  a bound of 1e-12 relative: a last-bit change in the gradient moves
  L-BFGS's iterates by rounding-level amounts, far below its stopping
  tolerance, as measured.

The tempered case with 24,000 rows and three classes crosses the size at
which the numba kernels switch to their parallel builds
(PARALLEL_MIN_ELEMENTS) in the scoring's predict_proba, so threads
launching numba's parallel kernels concurrently are exercised too (the
launch lock must serialise them; the workqueue layer aborts the process
otherwise). The fits themselves run the loss kernels' serial builds on the
gradient pass's worker threads, from several joblib threads at once.
"""

import threading

import numpy as np
import pytest
from joblib import parallel_backend
from sklearn.model_selection import GridSearchCV, StratifiedKFold
from threadpoolctl import threadpool_limits

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)
from skbayeslogit._kernels.config import PARALLEL_MIN_ELEMENTS
from skbayeslogit._linear import threads as _threads

BLAS_THREADS = _threads._blas_threads()  # before any fit of the session


def _data(n, k, seed):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    W = np.array([[1.0, -0.5, 0.0], [0.0, 1.0, 0.5], [-1.0, 0.0, 1.0]])[:k]
    y = np.argmax(X @ W.T + rng.gumbel(size=(n, k)), axis=1)
    return X, y


CASES = {
    "laplace": (LaplaceLogisticClassifier(), {"prior_scale": [0.1, 1.0, "auto"]}, 150, 3),
    "probit": (ProbitClassifier(), {"prior_scale": [0.1, 1.0, None]}, 150, 2),
    "tempered": (TemperedLogisticClassifier(), {"t1": [0.6, 0.9], "t2": [1.0, 1.3]}, 150, 3),
    "tempered-large": (TemperedLogisticClassifier(max_iter=60), {"t1": [0.7, 0.9]}, 24000, 3),
}
KEYS = ["mean_test_score", "std_test_score", "split0_test_score", "split1_test_score"]


def _search(case, n_jobs, backend=None):
    est, grid, n, k = CASES[case]
    X, y = _data(n, k, seed=len(case))
    search = GridSearchCV(
        est,
        grid,
        cv=StratifiedKFold(2, shuffle=True, random_state=0),
        scoring="neg_log_loss",
        n_jobs=n_jobs,
    )
    if backend is None:
        return search.fit(X, y), X
    with parallel_backend(backend, n_jobs=n_jobs):
        return search.fit(X, y), X


@pytest.fixture(scope="module")
def serial():
    return {case: _search(case, None) for case in CASES}


def test_the_large_case_uses_the_parallel_kernels():
    _, _, n, k = CASES["tempered-large"]
    # Half of the rows per fold, K activations per row: the held-out fold's
    # predict_proba.
    assert (n // 2) * k >= PARALLEL_MIN_ELEMENTS


@pytest.mark.parametrize("backend", ["loky", "threading"])
@pytest.mark.parametrize("case", list(CASES))
def test_grid_search_in_parallel_equals_serial(serial, case, backend):
    ref, X = serial[case]
    got, _ = _search(case, 2, backend)
    folds = ref
    if case == "tempered-large" and backend == "loky":
        # Workers run BLAS on one thread: so must the exact reference for
        # the fold scores (the final refit runs in this process).
        with threadpool_limits(1, user_api="blas"):
            folds, _ = _search(case, None)
        for key in KEYS:
            np.testing.assert_allclose(got.cv_results_[key], ref.cv_results_[key], rtol=1e-12)
    for key in KEYS:
        np.testing.assert_array_equal(got.cv_results_[key], folds.cv_results_[key], err_msg=key)
    # Fits in several threads share one hold on BLAS; it ends with them.
    assert _threads._blas_threads() == BLAS_THREADS
    assert got.best_params_ == ref.best_params_
    np.testing.assert_array_equal(got.best_estimator_.coef_, ref.best_estimator_.coef_)
    np.testing.assert_array_equal(
        got.best_estimator_.predict_proba(X[:50]), ref.best_estimator_.predict_proba(X[:50])
    )


def test_fits_in_two_threads_share_one_hold_on_blas():
    """The first fit to start sets BLAS to one thread and restores it when
    it ends; a fit that starts meanwhile in another thread runs under that
    hold and gives its workers the count recorded before it (reading BLAS
    then would say 1 and leave its passes on one thread)."""
    if BLAS_THREADS < 2:
        pytest.skip("BLAS runs one thread here: there is nothing to hold")
    entered, release = threading.Event(), threading.Event()
    seen = {}

    def first():
        with _threads.passes_own_threads():
            seen["first"] = _threads._held.threads
            entered.set()
            release.wait(10)

    thread = threading.Thread(target=first)
    thread.start()
    assert entered.wait(10)
    with _threads.passes_own_threads():
        seen["second"] = _threads._held.threads
        seen["blas, both running"] = _threads._blas_threads()
        release.set()
        thread.join(10)
        seen["blas, first ended"] = _threads._blas_threads()
    assert seen["first"] == seen["second"] == BLAS_THREADS
    assert seen["blas, both running"] == 1
    assert seen["blas, first ended"] == BLAS_THREADS
    assert _threads._blas_threads() == BLAS_THREADS


def test_blas_count_survives_many_interleaved_fits():
    """4 threads x 200 holds, 10 times: BLAS is back at its own count after
    each round. Each hold limiting and restoring on its own left BLAS at one
    thread in 1 of 30 such rounds (measured)."""
    if BLAS_THREADS < 2:
        pytest.skip("BLAS runs one thread here: there is nothing to hold")

    def holds():
        for _ in range(200):
            with _threads.passes_own_threads():
                pass

    for _ in range(10):
        threads = [threading.Thread(target=holds) for _ in range(4)]
        for thread in threads:
            thread.start()
        for thread in threads:
            thread.join()
        assert _threads._blas_threads() == BLAS_THREADS


def test_blas_count_survives_threaded_passes_outside_fits():
    """Passes on the worker pool outside a fit (the multiclass predictive's
    covariances, say) take the same shared hold: 4 threads x 100 passes, 10
    times, leave BLAS at its own count. A limit of their own per pass left
    it at one thread within 4 such rounds (measured)."""
    if BLAS_THREADS < 2:
        pytest.skip("BLAS runs one thread here: there is nothing to hold")

    def passes():
        for _ in range(100):
            _threads.map_tasks(int, [(i,) for i in range(4)], work=1e9)

    for _ in range(10):
        threads = [threading.Thread(target=passes) for _ in range(4)]
        for thread in threads:
            thread.start()
        for thread in threads:
            thread.join()
        assert _threads._blas_threads() == BLAS_THREADS
