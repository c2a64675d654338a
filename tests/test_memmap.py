"""The memory-mapped path: block-wise fits equal the in-memory fits."""

import numpy as np
import pytest

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)
from skbayeslogit._fit import newton as _newton
from skbayeslogit._linear.sources import set_block_rows

RTOL = 1e-8


def _rel(a, b):
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(b)))


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    rng = np.random.default_rng(7)
    n, d = 2_500, 4
    X = rng.standard_normal((n, d)) * [1.0, 3.0, 0.2, 1.0] + [0.0, 5.0, -1.0, 0.0]
    beta = np.array([1.0, -0.4, 2.0, 0.0])
    y2 = (X @ beta - 0.5 * 5.0 * -0.4 + rng.standard_normal(n) > 0).astype(int)
    y3 = np.argmax(X[:, :3] * [1.0, 0.3, 2.0] + rng.standard_normal((n, 3)), axis=1)
    w = rng.uniform(0.0, 2.0, n)
    path = tmp_path_factory.mktemp("mm") / "X.npy"
    np.save(path, X)
    return X, np.load(path, mmap_mode="r"), y2, y3, w


@pytest.fixture
def small_blocks():
    # 2,500 rows in blocks of 600: four full blocks and an uneven last one.
    old = set_block_rows(600)
    yield
    set_block_rows(old)


CASES = [
    (LaplaceLogisticClassifier, {"prior_scale": 1.0}, "y2"),
    (LaplaceLogisticClassifier, {"prior_scale": "auto"}, "y2"),
    (LaplaceLogisticClassifier, {"prior_scale": 0.5}, "y3"),
    (ProbitClassifier, {"prior_scale": 1.0}, "y2"),
    (ProbitClassifier, {"prior_scale": None}, "y2"),
    (TemperedLogisticClassifier, {"tol": 1e-10}, "y2"),
    (TemperedLogisticClassifier, {"tol": 1e-10}, "y3"),
]


@pytest.mark.parametrize("weighted", [False, True], ids=["unweighted", "weighted"])
@pytest.mark.parametrize(("model", "params", "target"), CASES)
def test_memmap_fit_equals_in_memory(data, small_blocks, model, params, target, weighted):
    X, mm, y2, y3, w = data
    assert isinstance(mm, np.memmap)
    y = y2 if target == "y2" else y3
    sw = w if weighted else None
    ref = model(**params).fit(X, y, sample_weight=sw)
    got = model(**params).fit(mm, y, sample_weight=sw)
    assert _rel(got.coef_, ref.coef_) < RTOL
    assert _rel(got.intercept_, ref.intercept_) < RTOL
    if hasattr(ref, "posterior_cov_"):
        assert _rel(got.posterior_cov_, ref.posterior_cov_) < RTOL
        if ref.prior_scale_ is None:  # maximum likelihood: no scale to compare
            assert got.prior_scale_ is None
        else:
            assert got.prior_scale_ == pytest.approx(ref.prior_scale_, rel=RTOL)
    else:
        assert got.loss_ == pytest.approx(ref.loss_, rel=RTOL)
    assert isinstance(got.coef_, np.ndarray) and not isinstance(got.coef_, np.memmap)
    np.testing.assert_array_equal(got.classes_, ref.classes_)
    assert got.n_features_in_ == ref.n_features_in_


def test_memmap_subsample_warm_start_matches(data, small_blocks, monkeypatch):
    # Force the subsample start and metric phase on small data: the same rows
    # are drawn from the memory map as from the array, and the
    # loss-and-gradient passes run block by block on the source.
    X, mm, y2, _, w = data
    monkeypatch.setattr(_newton, "_METRIC_MIN_ROWS", 800)
    monkeypatch.setattr(_newton, "_METRIC_MIN_RATIO", 2)
    assert _newton._metric_rows(len(X), X.shape[1] + 1) == 800
    ref = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y2, sample_weight=w)
    got = LaplaceLogisticClassifier(prior_scale=1.0).fit(mm, y2, sample_weight=w)
    assert got.n_iter_ == ref.n_iter_
    assert _rel(got.coef_, ref.coef_) < RTOL
    # And both agree with the plain Newton path (no subsample) to the tolerance.
    monkeypatch.setattr(_newton, "_METRIC_MIN_RATIO", 10**9)
    plain = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y2, sample_weight=w)
    assert _rel(got.coef_, plain.coef_) < 1e-4


def test_memmap_checks_run_blockwise(tmp_path, small_blocks):
    rng = np.random.default_rng(1)
    X = rng.standard_normal((1_500, 3))
    X[1_234, 2] = np.nan
    path = tmp_path / "bad.npy"
    np.save(path, X)
    y = rng.integers(0, 2, 1_500)
    with pytest.raises(ValueError, match=r"NaN in 1 row\(s\) \(first at row 1234, column 2\)"):
        LaplaceLogisticClassifier(prior_scale=1.0).fit(np.load(path, mmap_mode="r"), y)
    X[1_234, 2] = 0.0
    np.save(path, X)
    mm = np.load(path, mmap_mode="r")
    with pytest.raises(ValueError, match="only one class"):
        LaplaceLogisticClassifier(prior_scale=1.0).fit(mm, np.zeros(1_500, int))
    with pytest.raises(ValueError, match="Negative"):
        LaplaceLogisticClassifier(prior_scale=1.0).fit(mm, y, sample_weight=-np.ones(1_500))
    with pytest.raises(ValueError, match="Only binary"):
        ProbitClassifier(prior_scale=1.0).fit(mm, np.arange(1_500) % 3)


def test_set_block_rows_rejects_nonsense():
    with pytest.raises(ValueError, match="positive integer"):
        set_block_rows(0)
    assert set_block_rows(None) is None


# A column 1e8 + N(0, 1) (issue 21): the in-memory fit centres it and maps
# the posterior back; the block-wise fit must do the same, with the centre
# taken from the validation pass's moments (no extra read). Reference: the
# in-memory fit, itself checked against statsmodels and scikit-learn in
# test_numerics_faults.py. Both solve the same centred problem to tol=1e-12,
# so they differ by the rounding of sums added in another order (RTOL as
# above); the intercept, a - 1e8 b, carries the slope's relative error.
OFFSET_CASES = [
    (LaplaceLogisticClassifier, {"prior_scale": 1.0}),
    (LaplaceLogisticClassifier, {"prior_scale": "auto"}),
    (ProbitClassifier, {"prior_scale": None}),
]


@pytest.fixture(scope="module")
def offset_data(tmp_path_factory):
    rng = np.random.default_rng(21)
    X = rng.standard_normal((1_500, 2))
    y = (rng.random(1_500) < 1.0 / (1.0 + np.exp(-(1.4 * X[:, 0] - 0.5 * X[:, 1])))).astype(int)
    X = X + [1e8, 0.0]
    path = tmp_path_factory.mktemp("offset") / "X.npy"
    np.save(path, X)
    return X, np.load(path, mmap_mode="r"), y


@pytest.mark.parametrize(("model", "params"), OFFSET_CASES)
def test_memmap_offset_column_fits_as_in_memory(offset_data, small_blocks, model, params):
    X, mm, y = offset_data
    ref = model(tol=1e-12, **params).fit(X, y)
    got = model(tol=1e-12, **params).fit(mm, y)
    assert _rel(got.coef_, ref.coef_) < RTOL
    assert _rel(got.intercept_, ref.intercept_) < RTOL
    assert _rel(got.posterior_cov_[:2, :2], ref.posterior_cov_[:2, :2]) < RTOL
    # Not the unshifted column's slope by accident: the plain fit agrees too
    # (the shift is a change of coordinates; scale of the check: 1e-5 as in
    # test_numerics_faults.py).
    plain = model(tol=1e-12, **params).fit(X - [1e8, 0.0], y)
    np.testing.assert_allclose(got.coef_, plain.coef_, rtol=1e-5)


def test_memmap_offset_column_with_proper_intercept_prior_is_refused(offset_data):
    _, mm, y = offset_data
    with pytest.raises(ValueError, match=r"'x0'.*intercept_prior_scale"):
        LaplaceLogisticClassifier(intercept_prior_scale=2.0).fit(mm, y)
