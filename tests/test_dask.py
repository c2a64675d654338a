"""Dask input: fits equal the in-memory fits; predictions are lazy dask arrays."""

import pickle
import sys

import numpy as np
import pandas as pd
import pytest

from skbayeslogit import LaplaceLogisticClassifier, ProbitClassifier, TemperedLogisticClassifier

RTOL = 1e-8


def _rel(a, b):
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(b)))


@pytest.fixture(scope="module")
def client():
    distributed = pytest.importorskip("dask.distributed")
    cluster = distributed.LocalCluster(
        n_workers=2,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
    )
    client = distributed.Client(cluster)
    yield client
    client.close()
    cluster.close()


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(11)
    n, d = 2_000, 4
    X = rng.standard_normal((n, d)) * [1.0, 2.0, 0.5, 1.0] + [0.0, 3.0, 0.0, -1.0]
    y2 = (X @ np.array([1.0, -0.5, 2.0, 0.0]) + 1.5 + rng.standard_normal(n) > 0).astype(int)
    y3 = np.argmax(X[:, :3] * [1.0, 0.5, 2.0] + rng.standard_normal((n, 3)), axis=1)
    w = rng.uniform(0.0, 2.0, n)
    return X, y2, y3, w


# Uneven row chunks, a short last chunk and a column split (rechunked inside).
CHUNKS = ((700, 300, 650, 350), (3, 1))

CASES = [
    (LaplaceLogisticClassifier, {"prior_scale": 1.0}, "y2"),
    (LaplaceLogisticClassifier, {"prior_scale": "auto"}, "y2"),
    (LaplaceLogisticClassifier, {"prior_scale": 0.5}, "y3"),
    (ProbitClassifier, {"prior_scale": 1.0}, "y2"),
    (TemperedLogisticClassifier, {"tol": 1e-10}, "y2"),
    (TemperedLogisticClassifier, {"tol": 1e-10}, "y3"),
]


@pytest.mark.parametrize(("model", "params", "target"), CASES)
def test_dask_array_fit_equals_in_memory(client, data, model, params, target):
    import dask.array as da

    X, y2, y3, w = data
    y = y2 if target == "y2" else y3
    # Persisted, as data that fit in the cluster's memory should be: every
    # pass then reads the workers' chunks instead of shipping them again.
    dX, dy, dw = client.persist(
        [
            da.from_array(X, chunks=CHUNKS),
            da.from_array(y, chunks=(CHUNKS[0],)),
            da.from_array(w, chunks=(500,)),  # misaligned on purpose: rechunked to X's rows
        ]
    )
    ref = model(**params).fit(X, y, sample_weight=w)
    got = model(**params).fit(dX, dy, sample_weight=dw)
    assert _rel(got.coef_, ref.coef_) < RTOL
    assert _rel(got.intercept_, ref.intercept_) < RTOL
    if hasattr(ref, "posterior_cov_"):
        assert _rel(got.posterior_cov_, ref.posterior_cov_) < RTOL
        assert got.prior_scale_ == pytest.approx(ref.prior_scale_, rel=RTOL)
        assert got.log_evidence_ == pytest.approx(ref.log_evidence_, rel=RTOL)
    else:
        assert got.loss_ == pytest.approx(ref.loss_, rel=RTOL)
    # An ordinary fitted estimator: numpy attributes, picklable.
    assert type(got.coef_) is np.ndarray
    again = pickle.loads(pickle.dumps(got))
    np.testing.assert_array_equal(again.predict_proba(X[:50]), got.predict_proba(X[:50]))


def test_dask_dataframe_fit_and_predict(client, data):
    dd = pytest.importorskip("dask.dataframe")
    X, y2, _, _ = data
    frame = pd.DataFrame(X, columns=["a", "b", "c", "d"]).assign(y=y2)
    ddf = dd.from_pandas(frame, npartitions=3)
    features = ddf[["a", "b", "c", "d"]]
    ref = LaplaceLogisticClassifier(prior_scale=1.0).fit(frame[["a", "b", "c", "d"]], y2)
    got = LaplaceLogisticClassifier(prior_scale=1.0).fit(features, ddf["y"])
    assert _rel(got.coef_, ref.coef_) < RTOL
    assert list(got.feature_names_in_) == ["a", "b", "c", "d"]
    p = got.predict_proba(features)
    assert hasattr(p, "dask")
    np.testing.assert_allclose(
        p.compute(), ref.predict_proba(frame[["a", "b", "c", "d"]]), rtol=1e-7, atol=1e-12
    )


@pytest.mark.parametrize(("model", "params", "target"), [CASES[0], CASES[2], CASES[3], CASES[4]])
def test_predict_on_dask_is_lazy_and_equal(client, data, model, params, target):
    import dask.array as da

    X, y2, y3, _ = data
    y = y2 if target == "y2" else y3
    # Seeded: the multiclass interval is Monte Carlo, the same draws per call.
    fitted = (
        model(**params)
        .set_params(**({} if "t1" in model().get_params() else {"random_state": 0}))
        .fit(X, y)
    )
    dX = da.from_array(X, chunks=CHUNKS)
    methods = ["predict", "predict_proba", "decision_function", "predict_log_proba"]
    if hasattr(fitted, "logit_moments"):
        methods += ["logit_moments", "predict_interval"]
    for name in methods:
        lazy = getattr(fitted, name)(dX)
        eager = getattr(fitted, name)(X)
        pairs = zip(lazy, eager, strict=True) if isinstance(eager, tuple) else [(lazy, eager)]
        for lz, ea in pairs:
            assert isinstance(lz, da.Array), name
            assert lz.shape == ea.shape, name
            assert lz.chunks[0] == CHUNKS[0], name
            np.testing.assert_allclose(lz.compute(), ea, rtol=1e-12, atol=1e-300, err_msg=name)


def test_dask_checks_are_done(client, data):
    import dask.array as da

    X, y2, _, w = data
    bad = X.copy()
    bad[1_500, 1] = np.inf
    with pytest.raises(
        ValueError, match=r"infinity in 1 row\(s\) \(first at row 1500, column 1\)"
    ):
        LaplaceLogisticClassifier().fit(da.from_array(bad, chunks=(600, 4)), y2)
    dX = da.from_array(X, chunks=(600, 4))
    with pytest.raises(ValueError, match="only one class"):
        LaplaceLogisticClassifier().fit(dX, np.ones(len(X)))
    with pytest.raises(ValueError, match="Negative"):
        LaplaceLogisticClassifier().fit(dX, y2, sample_weight=-w)
    with pytest.raises(ValueError, match="expecting 4 features"):
        LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y2).predict(dX[:, :3])


def test_without_dask_the_message_names_the_extra(monkeypatch, data):
    X, y2, _, _ = data

    class FakeDaskArray:
        # What the library looks for to recognise a dask collection.
        __dask_graph__ = None

    for name in [m for m in sys.modules if m == "dask" or m.startswith("dask.")]:
        monkeypatch.delitem(sys.modules, name)
    monkeypatch.setitem(sys.modules, "dask", None)  # import dask -> ImportError
    with pytest.raises(ImportError, match=r'pip install "skbayeslogit\[dask\]"'):
        LaplaceLogisticClassifier().fit(FakeDaskArray(), y2)
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y2)  # numpy still works
    with pytest.raises(ImportError, match=r"skbayeslogit\[dask\]"):
        model.predict(FakeDaskArray())


@pytest.mark.parametrize(
    ("model", "params"),
    [(LaplaceLogisticClassifier, {"prior_scale": 1.0}), (ProbitClassifier, {"prior_scale": None})],
)
def test_dask_offset_column_fits_as_in_memory(client, model, params):
    """A column 1e8 + N(0, 1) (issue 21): centred block by block, as in memory.

    Reference: the in-memory fit (checked against statsmodels and
    scikit-learn in test_numerics_faults.py); both solve the same centred
    problem to tol=1e-12, so they agree to the rounding of the chunk sums
    (RTOL); the intercept a - 1e8 b carries the slope's relative error.
    """
    import dask.array as da

    rng = np.random.default_rng(21)
    X = rng.standard_normal((1_500, 2))
    y = (rng.random(1_500) < 1.0 / (1.0 + np.exp(-(1.4 * X[:, 0] - 0.5 * X[:, 1])))).astype(int)
    X = X + [1e8, 0.0]
    ref = model(tol=1e-12, **params).fit(X, y)
    got = model(tol=1e-12, **params).fit(
        da.from_array(X, chunks=(400, 2)), da.from_array(y, chunks=400)
    )
    assert _rel(got.coef_, ref.coef_) < RTOL
    assert _rel(got.intercept_, ref.intercept_) < RTOL
    assert _rel(got.posterior_cov_[:2, :2], ref.posterior_cov_[:2, :2]) < RTOL
