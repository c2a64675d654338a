"""Caller data is never modified, and refitting does not leak memory."""

import gc
import os
import tracemalloc
import warnings

import numpy as np
import pandas as pd
import pytest

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)

ESTIMATORS = {
    "laplace": lambda: LaplaceLogisticClassifier(prior_scale=1.0),
    "laplace-auto-mc": lambda: LaplaceLogisticClassifier(
        predictive="mc", n_draws=100, random_state=0
    ),
    "probit": lambda: ProbitClassifier(prior_scale=1.0),
    "tempered": lambda: TemperedLogisticClassifier(),
}

RNG = np.random.default_rng(99)
N = 100
X = RNG.normal(size=(N, 3))
Y = (X[:, 0] + RNG.normal(size=N) > 0).astype(int)
W = RNG.uniform(0.5, 2.0, size=N)


def _exercise(model, Xa, ya, wa):
    """Every public method that reads caller data."""
    model.fit(Xa, ya, sample_weight=wa)
    model.predict(Xa)
    model.predict_proba(Xa)
    model.predict_log_proba(Xa)
    model.decision_function(Xa)
    model.score(Xa, ya)
    if hasattr(model, "predict_interval"):
        model.predict_interval(Xa)
        model.logit_moments(Xa)
        model.coef_table()
        model.sample_coef(5, random_state=0)
    if hasattr(model, "label_doubt"):
        model.label_doubt(Xa, ya)
    return model


@pytest.mark.parametrize("name", list(ESTIMATORS))
def test_numpy_inputs_are_not_modified(name):
    # Non-contiguous and float32 inputs too: the converted copies are ours.
    for Xa in (X.copy(), np.asfortranarray(X), X.astype(np.float32), X[:, [2, 0, 1]]):
        ya, wa = Y.copy(), W.copy()
        before = (Xa.copy(), ya.copy(), wa.copy())
        _exercise(ESTIMATORS[name](), Xa, ya, wa)
        np.testing.assert_array_equal(Xa, before[0])
        np.testing.assert_array_equal(ya, before[1])
        np.testing.assert_array_equal(wa, before[2])


@pytest.mark.parametrize("name", list(ESTIMATORS))
def test_read_only_inputs_work_and_give_the_writeable_fit(name):
    frozen = [a.copy() for a in (X, Y, W)]
    for a in frozen:
        a.setflags(write=False)
    got = _exercise(ESTIMATORS[name](), *frozen)
    ref = ESTIMATORS[name]().fit(X, Y, sample_weight=W)
    np.testing.assert_array_equal(got.coef_, ref.coef_)
    np.testing.assert_array_equal(got.predict_proba(X), ref.predict_proba(X))


def _frame():
    df = pd.DataFrame(X, columns=["firmness", "starch", "bruise"])
    df["orchard"] = pd.Series(np.where(Y == 1, "north", "south"), dtype="str")
    df["grade"] = pd.Series(np.where(Y == 1, "keep", "sell"), dtype="str")
    df["count"] = pd.array(RNG.integers(0, 5, size=N), dtype="Int64")
    df.attrs["source"] = "test"
    return df


@pytest.mark.parametrize("name", ["laplace", "probit", "tempered"])
def test_pandas_frames_with_str_columns_are_not_modified(name):
    df = _frame()
    before = df.copy(deep=True)
    feats = ["firmness", "starch", "bruise", "count"]
    # The estimator directly, on a frame slice and a str target Series.
    _exercise(ESTIMATORS[name](), df[feats], df["grade"], None)
    # The accessor's whole path.
    model = df.bayeslogit.fit("grade", feats, name)
    df.bayeslogit.predict_table(model)
    df.bayeslogit.confusion("grade", model)
    df.bayeslogit.calibration("grade", model)
    df.bayeslogit.doubtful_labels("grade", model, top=5)
    pd.testing.assert_frame_equal(df, before, check_exact=True)
    assert df.attrs == {"source": "test"}
    assert list(df.dtypes.astype(str)) == list(before.dtypes.astype(str))


def _rss_bytes():
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


@pytest.mark.skipif(not os.path.exists("/proc/self/statm"), reason="needs Linux /proc")
def test_refitting_does_not_leak_memory():
    """1,000 refits on 100 rows (fixed prior scale; the three models in
    turn), after a warm-up of 100 (numba compilation, scipy's and
    scikit-learn's caches).

    Two measures, because they see different memory: the resident set size
    over the last 900 fits counts native allocations too (numba's runtime,
    BLAS, scipy's C code); it grew by 74 kB when measured, and a leak of one
    100 x 3 float64 array per fit would add 2.2 MB, so the bound is 1 MB.
    tracemalloc over 300 further fits counts every live Python and numpy
    allocation exactly; measured 20 kB (one-off caches), bound 64 kB, about
    210 bytes a fit, less than one leaked numpy array object with its data.
    """
    models = [
        LaplaceLogisticClassifier(prior_scale=1.0),
        ProbitClassifier(prior_scale=1.0),
        TemperedLogisticClassifier(prior_scale=1.0),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for i in range(100):
            models[i % 3].fit(X, Y)
        gc.collect()
        rss_start = _rss_bytes()
        for i in range(900):
            models[i % 3].fit(X, Y)
        gc.collect()
        rss_growth = _rss_bytes() - rss_start
        tracemalloc.start()
        try:
            for i in range(30):
                models[i % 3].fit(X, Y)
            gc.collect()
            start, _ = tracemalloc.get_traced_memory()
            for i in range(300):
                models[i % 3].fit(X, Y)
            gc.collect()
            end, _ = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
    assert rss_growth < 1 << 20, f"resident memory grew by {rss_growth} bytes over 900 refits"
    assert end - start < 64 * 1024, f"live memory grew by {end - start} bytes over 300 refits"
