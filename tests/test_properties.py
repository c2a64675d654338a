"""Property-based tests (hypothesis, derandomized) of kernels and estimators.

tests/test_tempered_kernels.py already checks, as properties, that a
tempered-softmax row sums to one and is shift invariant for temperatures
from a fixed list, and that the loss gradient for class-index labels matches
central differences. This file adds what those leave out: continuous
temperatures with K and the activation scale drawn at random, whole
batches, monotonicity, non-negativity and the bound 1 / (1 - t1) of the
loss, gradients for probability labels and for the binary kernel, and
properties of the fitted estimators (posterior covariance, proper
probabilities, bit-for-bit refits).

Every example draws its arrays from a numpy Generator seeded by hypothesis,
as float64 C-contiguous arrays (the one signature the kernels compile).
"""

import warnings

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)
from skbayeslogit.tempered_functions import (
    bitempered_loss,
    bitempered_loss_binary,
    tempered_softmax,
)

KERNEL = settings(max_examples=100, derandomize=True, deadline=None)
ESTIMATOR = settings(max_examples=25, derandomize=True, deadline=None)

seeds = st.integers(0, 2**32 - 1)
temperatures = st.floats(0.0, 5.0)
log_scales = st.floats(-3.0, 3.0)  # activations of size 10^u


def _activations(seed, n, k, log_scale):
    rng = np.random.default_rng(seed)
    return rng.standard_normal((n, k)) * 10.0**log_scale


# ------------------------------------------------------------ tempered softmax


@KERNEL
@given(seed=seeds, t=temperatures, k=st.integers(1, 40), log_scale=log_scales)
def test_softmax_rows_are_distributions_and_shift_invariant(seed, t, k, log_scale):
    a = _activations(seed, 8, k, log_scale)
    p = tempered_softmax(a, t)
    assert p.shape == a.shape and np.all((p >= 0) & (p <= 1))
    # Documented bound: rows sum to 1 within 4 eps (sqrt(K) + 1).
    tol = 4 * np.finfo(float).eps * (np.sqrt(k) + 1)
    np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=0, atol=tol)
    # Shift by a multiple of the scale: lambda(a + c) = lambda(a) + c exactly
    # in exact arithmetic; rounding of a + c costs eps * |c| / scale, times
    # the slope of exp_t (at most 1 + |t - 1| * ... bounded by 10 here).
    shift = 3.0 * 10.0**log_scale
    np.testing.assert_allclose(tempered_softmax(a + shift, t), p, rtol=0, atol=1e-12)


@KERNEL
@given(seed=seeds, t=temperatures, k=st.integers(2, 40), log_scale=log_scales)
def test_softmax_is_monotone_in_the_activations(seed, t, k, log_scale):
    """p_i = exp_t(a_i - lambda) with exp_t non-decreasing: a larger
    activation never gets a smaller probability (ties within rounding)."""
    a = _activations(seed, 4, k, log_scale)
    p = tempered_softmax(a, t)
    order = np.argsort(a, axis=1)
    sorted_p = np.take_along_axis(p, order, axis=1)
    assert np.all(np.diff(sorted_p, axis=1) >= -1e-15)


@KERNEL
@given(seed=seeds, t=temperatures, k=st.integers(1, 20))
def test_softmax_batch_equals_row_by_row(seed, t, k):
    a = _activations(seed, 5, k, 0.5)
    batch = tempered_softmax(a, t)
    rows = np.vstack([tempered_softmax(a[i], t) for i in range(len(a))])
    np.testing.assert_array_equal(batch, rows)


# ---------------------------------------------------------- bi-tempered loss

t1s = st.floats(0.0, 1.0)
t2s = st.floats(0.5, 4.0)
smoothing = st.sampled_from([0.0, 0.05, 0.3])


def _labels(seed, n, k, kind):
    rng = np.random.default_rng(seed + 1)
    if kind == "index":
        return rng.integers(0, k, size=n)
    return rng.dirichlet(np.ones(k), size=n)


@KERNEL
@given(
    seed=seeds,
    t1=t1s,
    t2=t2s,
    k=st.integers(2, 12),
    log_scale=st.floats(-2.0, 2.0),
    kind=st.sampled_from(["index", "prob"]),
    ls=smoothing,
)
def test_loss_is_non_negative_and_bounded(seed, t1, t2, k, log_scale, kind, ls):
    """0 <= L (a Bregman divergence) and, for t1 < 1, L <= 1 / (1 - t1)
    (Amid et al. 2019; the bound is attained when the true class gets
    probability 0). t1 = 1 with t2 < 1 may be +inf (documented), never NaN."""
    a = _activations(seed, 16, k, log_scale)
    loss, grad = bitempered_loss(a, _labels(seed, 16, k, kind), t1, t2, ls)
    assert not np.any(np.isnan(loss)) and np.all(np.isfinite(grad))
    # Rounding: the loss is a difference of O(1 / (1 - t1)) terms.
    slack = 1e-12 * max(1.0, 1.0 / max(1.0 - t1, 1e-12))
    assert np.all(loss >= -slack)
    if t1 < 1.0:
        assert np.all(loss <= 1.0 / (1.0 - t1) + slack)
    np.testing.assert_allclose(grad.sum(axis=1), 0.0, rtol=0, atol=1e-12)


@KERNEL
@given(seed=seeds, t1=t1s, t2=st.floats(1.0, 4.0), k=st.integers(2, 8), ls=smoothing)
def test_loss_gradient_matches_central_differences_for_probability_labels(seed, t1, t2, k, ls):
    """For t2 >= 1 the loss is smooth in the activations (full support)."""
    a = _activations(seed, 1, k, 0.0)
    y = _labels(seed, 1, k, "prob")
    _, grad = bitempered_loss(a, y, t1, t2, ls)
    h = 1e-6
    plus = a + h * np.eye(k)
    minus = a - h * np.eye(k)
    ys = np.repeat(y, k, axis=0)
    diff = bitempered_loss(plus, ys, t1, t2, ls)[0] - bitempered_loss(minus, ys, t1, t2, ls)[0]
    # Central differences with h = 1e-6: truncation h^2 |L'''| / 6 ~ 1e-12 and
    # rounding eps |L| / h ~ 2e-10 |L|, with |L| of order one here (the loss
    # is bounded by 1 / (1 - t1) and about log K near t1 = 1): 1e-7 (1 + |g|)
    # bounds both with a wide margin.
    fd = diff / (2 * h)
    assert np.all(np.abs(grad[0] - fd) <= 1e-7 * (1 + np.abs(grad[0]))), (grad[0], fd)


@KERNEL
@given(seed=seeds, t1=t1s, t2=st.floats(1.0, 4.0), ls=smoothing)
def test_binary_kernel_gradient_matches_central_differences(seed, t1, t2, ls):
    rng = np.random.default_rng(seed)
    a = rng.normal(scale=3.0, size=32)
    y = rng.random(32)
    y[:16] = np.round(y[:16])
    loss, dloss = bitempered_loss_binary(a, y, t1, t2, ls)
    assert np.all(loss >= -1e-12) and np.all(np.isfinite(dloss))
    if t1 < 1.0:
        assert np.all(loss <= 1.0 / (1.0 - t1) + 1e-9)
    h = 1e-6
    up = bitempered_loss_binary(a + h, y, t1, t2, ls)[0]
    down = bitempered_loss_binary(a - h, y, t1, t2, ls)[0]
    np.testing.assert_allclose(dloss, (up - down) / (2 * h), rtol=0, atol=1e-7)


# ----------------------------------------------------------------- estimators


def _data(seed, n, d, k, signal):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, d))
    W = rng.normal(scale=signal, size=(k, d))
    y = np.argmax(X @ W.T + rng.gumbel(size=(n, k)), axis=1)
    # Every class present at least twice: the property is about fitting,
    # not about the (separately tested) one-class error.
    y[: 2 * k] = np.repeat(np.arange(k), 2)
    return X, y


@ESTIMATOR
@given(
    seed=seeds,
    n=st.integers(12, 80),
    d=st.integers(1, 6),
    k=st.sampled_from([2, 2, 3]),
    model=st.sampled_from(["laplace", "probit"]),
    prior=st.sampled_from([0.3, 1.0, 10.0]),
    signal=st.sampled_from([0.0, 0.5, 2.0]),
)
def test_posterior_covariance_is_symmetric_positive_definite(seed, n, d, k, model, prior, signal):
    """The Laplace covariance is the inverse of a Hessian that the prior
    makes positive definite. Multiclass with a flat intercept prior is
    singular along the constrained common shift of the intercepts
    (documented), so there it is positive semi-definite with exactly one
    zero eigenvalue."""
    if model == "probit":
        k = 2
    X, y = _data(seed, n, d, k, signal)
    cls = LaplaceLogisticClassifier if model == "laplace" else ProbitClassifier
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # separation is not at issue here
        est = cls(prior_scale=prior).fit(X, y)
    cov = est.posterior_cov_
    assert np.all(np.isfinite(cov))
    scale = np.max(np.abs(cov))
    np.testing.assert_allclose(cov, cov.T, rtol=0, atol=1e-13 * scale)
    eig = np.linalg.eigvalsh(cov)
    # Rounding of an eigensolver: |error| <~ p eps ||cov||.
    floor = 10 * len(cov) * np.finfo(float).eps * scale
    if k == 2:
        assert eig[0] > floor
    else:
        assert abs(eig[0]) <= floor and eig[1] > floor


@ESTIMATOR
@given(
    seed=seeds,
    n=st.integers(12, 60),
    d=st.integers(1, 5),
    k=st.sampled_from([2, 3]),
    model=st.sampled_from(["laplace", "probit", "tempered", "laplace-mc"]),
    query_scale=st.sampled_from([1e-3, 1.0, 30.0, 1e3]),
)
def test_predict_proba_rows_are_distributions(seed, n, d, k, model, query_scale):
    if model == "probit":
        k = 2
    X, y = _data(seed, n, d, k, 1.0)
    est = {
        "laplace": LaplaceLogisticClassifier(prior_scale=1.0),
        "laplace-mc": LaplaceLogisticClassifier(
            prior_scale=1.0, predictive="mc", n_draws=200, random_state=0
        ),
        "probit": ProbitClassifier(prior_scale=1.0),
        "tempered": TemperedLogisticClassifier(prior_scale=1.0),
    }[model].fit(X, y)
    Q = np.random.default_rng(seed + 7).normal(size=(20, d)) * query_scale
    P = est.predict_proba(Q)
    assert P.shape == (20, k) and np.all(np.isfinite(P)) and np.all((P >= 0) & (P <= 1))
    np.testing.assert_allclose(P.sum(axis=1), 1.0, rtol=0, atol=1e-12)
    # predict agrees with the most probable class.
    np.testing.assert_array_equal(est.predict(Q), est.classes_[np.argmax(P, axis=1)])


@ESTIMATOR
@given(
    seed=seeds,
    n=st.integers(12, 60),
    d=st.integers(1, 5),
    k=st.sampled_from([2, 3]),
    model=st.sampled_from(["laplace-auto", "laplace-mc", "probit", "tempered"]),
)
def test_refits_are_bit_for_bit_identical(seed, n, d, k, model):
    """Same input, same parameters, same seed: identical parameters,
    probabilities and posterior draws (no hidden state, no thread-order
    dependent reductions on one core or two)."""
    if model == "probit":
        k = 2
    X, y = _data(seed, n, d, k, 1.0)

    def make():
        return {
            "laplace-auto": LaplaceLogisticClassifier(prior_scale="auto"),
            "laplace-mc": LaplaceLogisticClassifier(
                prior_scale=1.0, predictive="mc", n_draws=100, random_state=seed % 1000
            ),
            "probit": ProbitClassifier(prior_scale=1.0),
            "tempered": TemperedLogisticClassifier(prior_scale=1.0),
        }[model]

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        first, second = make().fit(X, y), make().fit(X, y)
        again = make().fit(X, y).fit(X, y)  # refitting the same instance
    for other in (second, again):
        np.testing.assert_array_equal(first.coef_, other.coef_)
        np.testing.assert_array_equal(first.intercept_, other.intercept_)
        np.testing.assert_array_equal(first.predict_proba(X), other.predict_proba(X))
        if hasattr(first, "sample_coef"):
            np.testing.assert_array_equal(first.posterior_cov_, other.posterior_cov_)
            np.testing.assert_array_equal(first.sample_coef(5, 3), other.sample_coef(5, 3))


def test_loss_is_continuous_as_t1_tends_to_1_for_probability_labels():
    """Regression for the property above (found at t1 = 1 - 1.1e-16): the
    loss of a probability label with p > e y lost every digit to the
    cancellation (p^(1-t1) - y^(1-t1)) / (1 - t1). The reference is the
    t1 = 1 loss (cross-entropy minus entropy, a separate code path); the
    loss is smooth in t1 with derivative O(1), so at 1 - t1 = 1e-16..1e-8 the
    difference must be below 10 (1 - t1) plus rounding."""
    a = np.random.default_rng(0).standard_normal((1, 3))
    y = np.random.default_rng(1).dirichlet(np.ones(3), size=1)
    for t2 in (1.0, 1.5):
        limit = bitempered_loss(a, y, 1.0, t2)[0][0]
        for gap in (1.1e-16, 1e-14, 1e-12, 1e-10, 1e-8):
            value = bitempered_loss(a, y, 1.0 - gap, t2)[0][0]
            assert abs(value - limit) <= 10 * gap + 1e-14, (t2, gap, value, limit)
