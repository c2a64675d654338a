"""Checks of the tempered-softmax and bi-tempered-loss kernels.

Method under test: Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic
Loss Based on Bregman Divergences", NeurIPS 2019.  Every reference value comes
from outside the package: scipy's root finder and special functions, scipy's
numerical differentiation, the sparsemax closed form of Martins & Astudillo
(ICML 2016), or closed forms derived in the comments.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import threading
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.differentiate import derivative, jacobian
from scipy.optimize import brentq
from scipy.special import log_softmax, softmax

from skbayeslogit import tempered_functions as tf
from skbayeslogit._kernels import tempered_dispatch as tk
from skbayeslogit._kernels import tempered_loss
from skbayeslogit._kernels.config import PARALLEL_MIN_ELEMENTS
from skbayeslogit.tempered_functions import (
    bitempered_loss,
    bitempered_loss_binary,
    exp_t,
    log_t,
    tempered_normaliser,
    tempered_sigmoid,
    tempered_softmax,
)

TEMPERATURES = [0.1, 0.5, 0.99, 1.0, 1.01, 1.2, 2.0, 5.0]


def _rng(seed=0):
    return np.random.default_rng(seed)


# ---------------------------------------------------------------- log_t/exp_t


def test_log_exp_t_limits_and_closed_forms():
    u = np.array([1e-3, 0.3, 1.0, 2.5, 40.0])
    # t = 1 is exactly numpy's log/exp.
    assert np.array_equal(log_t(u, 1.0), np.log(u))
    assert np.array_equal(exp_t(np.log(u), 1.0), np.exp(np.log(u)))
    # Taylor expansion of log_t in (1 - t): log u + (1 - t) (log u)^2 / 2 + O((1-t)^2).
    for d in (1e-7, -1e-7):
        expected = np.log(u) + d * np.log(u) ** 2 / 2
        np.testing.assert_allclose(log_t(u, 1.0 - d), expected, rtol=0, atol=1e-12)
    # t = 2: exp_2(x) = 1 / (1 - x) for x < 1 (closed form), +inf at/after the pole.
    x = np.array([-5.0, 0.0, 0.5, 0.999, 1.0, 3.0])
    np.testing.assert_allclose(exp_t(x[:4], 2.0), 1.0 / (1.0 - x[:4]), rtol=1e-15)
    assert np.all(np.isinf(exp_t(x[4:], 2.0)))
    # t = 0: exp_0(x) = [1 + x]_+ ; t = 0.5: [1 + x/2]_+^2.
    np.testing.assert_allclose(exp_t(x, 0.0), np.maximum(1.0 + x, 0.0), rtol=1e-15)
    np.testing.assert_allclose(exp_t(-x, 0.5), np.maximum(1.0 - x / 2, 0.0) ** 2, rtol=1e-15)
    # log_t(0) = -1 / (1 - t) for t < 1.
    assert log_t(0.0, 0.25) == pytest.approx(-1.0 / 0.75, rel=1e-15)
    # Inverse pair on the range of log_t.
    for t in (0.3, 0.99, 1.5, 4.0):
        x = log_t(u, t)
        # Relative condition number of exp_t at x: |x| exp_t(x)**(t - 1)
        # (large near the pole of t > 1); a few ulps of x are amplified by it.
        cond = np.abs(x) * exp_t(x, t) ** (t - 1.0) + 1.0
        np.testing.assert_array_less(np.abs(exp_t(x, t) / u - 1.0), 8 * np.finfo(float).eps * cond)
    with pytest.raises(ValueError, match="u >= 0"):
        log_t(-1.0, 0.5)
    with pytest.raises(ValueError, match=r"t must be in \[0, 10\]"):
        exp_t(1.0, -0.5)


# ------------------------------------------------------------------ normaliser


def _normaliser_brentq(a, t):
    """Root of sum_i exp_t(a_i - lam) = 1 by scipy brentq on [max a, max a + log_{2-t} K]."""
    m = a.max()
    k = a.size
    hi = m + (np.log(k) if t == 1 else (k ** (t - 1.0) - 1.0) / (t - 1.0))

    def f(lam):
        return np.sum(exp_t(a - lam, t)) - 1.0

    return brentq(f, m, hi * (1 + 1e-12) + 1e-12, xtol=1e-14, rtol=8.9e-16, maxiter=500)


@pytest.mark.parametrize("t", [0.1, 0.5, 0.8, 0.99, 1.01, 1.2, 1.5, 2.0, 5.0])
def test_normaliser_matches_brentq(t):
    rng = _rng(1)
    for k in (2, 7, 300):
        for scale in (1e-2, 1.0, 1e3):
            # Single rows; rows solved in blocks are checked against these
            # bitwise (test_row_blocks_match_single_rows_bitwise).
            a = rng.normal(scale=scale, size=(3, k))
            lam = tempered_normaliser(a, t)
            ref = np.array([_normaliser_brentq(row, t) for row in a])
            # brentq's own tolerance is 1e-14 + 8.9e-16 |lam|.
            np.testing.assert_allclose(lam, ref, rtol=4e-15, atol=2e-14, err_msg=f"K={k}")


@pytest.mark.parametrize("t", [0.0, 0.5, 0.8, 1.2, 1.5, 2.0, 1.3])
@pytest.mark.parametrize("k", [2, 3, 10, 50])
def test_row_blocks_match_single_rows_bitwise(t, k):
    # Rows are solved 16 at a time with the loops over rows vectorised; each
    # row must still get exactly what the one-row solver gives it (the
    # serial/parallel equality of the kernels rests on this).  37 rows: two
    # blocks and five single rows; rows of very different spread share a
    # block, so lanes stop at different iterations.
    rng = _rng(21)
    a = rng.normal(size=(37, k)) * np.geomspace(1e-3, 1e3, 37)[:, None]
    y = rng.integers(0, k, size=37)
    lam = tempered_normaliser(a, t)
    p = tempered_softmax(a, t)
    loss, grad = bitempered_loss(a, y, 0.8, t)
    for i in range(37):
        assert lam[i] == tempered_normaliser(a[i], t), i
        np.testing.assert_array_equal(p[i], tempered_softmax(a[i], t))
        loss_i, grad_i = bitempered_loss(a[i], y[i], 0.8, t)
        assert loss[i] == loss_i, i
        np.testing.assert_array_equal(grad[i], grad_i)


@pytest.mark.parametrize("t2", [0.8, 1.2, 1.3])
def test_warm_started_normalisers_match_cold(t2):
    # Starting Newton from the previous evaluation's normalisers (as a fit
    # does) changes the result by no more than the solver's tolerance, from
    # near starts (a small step in the activations) and from far ones (a
    # different scale: starts on both sides of the root, clipped ones).
    rng = _rng(22)
    n, k = 203, 10
    y = rng.integers(0, k, size=n)
    lam = np.empty(n)
    base = rng.normal(size=(n, k))
    for step, a in enumerate((3.0 * base, 3.0003 * base, 300.0 * base, 0.01 * base, 3.0 * base)):
        loss, grad = tf.bitempered_loss_warm(a, y, 0.7, t2, 0.0, lam, step > 0)
        cold_loss, cold_grad = bitempered_loss(a, y, 0.7, t2)
        np.testing.assert_allclose(loss, cold_loss, rtol=1e-13, atol=1e-15)
        np.testing.assert_allclose(grad, cold_grad, rtol=1e-12, atol=1e-14)
        np.testing.assert_allclose(lam, tempered_normaliser(a, t2), rtol=1e-14)
    with pytest.raises(ValueError, match="2-D"):
        tf.bitempered_loss_warm(a[0], y[0], 0.7, t2, 0.0, lam, True)
    with pytest.raises(ValueError, match="normalisers"):
        tf.bitempered_loss_warm(a, y, 0.7, t2, 0.0, lam[::2], True)


def _sparsemax(z):
    """Sparsemax closed form, Martins & Astudillo (ICML 2016), Algorithm 1."""
    zs = np.sort(z)[::-1]
    cs = np.cumsum(zs)
    ks = np.arange(1, z.size + 1)
    k = ks[1 + ks * zs > cs].max()
    tau = (cs[k - 1] - 1.0) / k
    return np.maximum(z - tau, 0.0), tau


def test_t0_is_sparsemax():
    # exp_0(u) = [1 + u]_+, so p_i = [a_i - (lam - 1)]_+: sparsemax with
    # threshold tau = lam - 1.
    rng = _rng(2)
    a = rng.normal(scale=2.0, size=(20, 9))
    p = tempered_softmax(a, 0.0)
    lam = tempered_normaliser(a, 0.0)
    for row, prow, lrow in zip(a, p, lam, strict=True):
        ref, tau = _sparsemax(row)
        np.testing.assert_allclose(prow, ref, rtol=0, atol=1e-14)
        assert lrow - 1.0 == pytest.approx(tau, abs=1e-14)
    # t -> 0: the error against sparsemax shrinks in proportion to t.
    errors = [np.abs(tempered_softmax(a, t) - p).max() for t in (1e-3, 1e-6)]
    assert errors[1] < 1e-5
    assert errors[1] / errors[0] < 1e-2


@pytest.mark.parametrize("t", TEMPERATURES)
def test_probabilities_sum_to_one(t):
    rng = _rng(3)
    for k in (2, 10, 1000, 50_000):
        for scale in (1e-3, 1.0, 1e3):
            a = rng.normal(scale=scale, size=(2, k))
            p = tempered_softmax(a, t)
            assert np.all(p >= 0) and np.all(p <= 1)
            np.testing.assert_allclose(
                p.sum(axis=1), 1.0, rtol=1e-12, atol=0, err_msg=f"K={k} scale={scale}"
            )


def test_probabilities_match_exp_t_at_normaliser():
    # The kernel evaluates exp_t by repeated multiplication when 1/(1-t) is
    # an integer (t = 0.8, 1.2, 2); the public exp_t uses log1p/exp.
    rng = _rng(4)
    a = rng.normal(scale=3.0, size=(5, 40))
    for t in (0.0, 0.5, 0.8, 1.2, 1.3, 2.0, 3.7):
        lam = tempered_normaliser(a, t)
        np.testing.assert_allclose(
            tempered_softmax(a, t), exp_t(a - lam[:, None], t), rtol=1e-13, atol=1e-300
        )


def test_shift_invariance_and_one_row_input():
    rng = _rng(5)
    a = rng.normal(scale=5.0, size=(4, 30))
    for t in TEMPERATURES:
        p = tempered_softmax(a, t)
        lam = tempered_normaliser(a, t)
        for c in (-300.0, 7.5, 1e3):
            np.testing.assert_allclose(tempered_softmax(a + c, t), p, rtol=0, atol=1e-12)
            np.testing.assert_allclose(tempered_normaliser(a + c, t), lam + c, rtol=1e-13)
        np.testing.assert_array_equal(tempered_softmax(a[1], t), p[1])
        assert tempered_normaliser(a[1], t) == lam[1]


def test_softmax_at_t1_and_sigmoid():
    rng = _rng(6)
    a = rng.normal(scale=4.0, size=(6, 5))
    np.testing.assert_allclose(tempered_softmax(a, 1.0), softmax(a, axis=1), rtol=1e-14)
    b = rng.normal(scale=4.0, size=50)
    np.testing.assert_allclose(
        tempered_sigmoid(b, 1.0), softmax(np.c_[np.zeros(50), b], 1)[:, 1], rtol=1e-14
    )
    np.testing.assert_allclose(
        tempered_sigmoid(b, 1.7), tempered_softmax(np.c_[np.zeros(50), b], 1.7)[:, 1], rtol=0
    )


# ------------------------------------------------------------------------ loss


LOSS_TEMPERATURES = [
    (1.0, 1.0),
    (0.8, 1.2),
    (0.2, 4.0),
    (0.5, 0.5),
    (0.0, 1.0),
    (1.0, 2.0),
    (0.6, 1.0),
    (0.3, 0.7),
]


def _fd_gradient(a, labels, t1, t2, ls):
    """scipy.differentiate.jacobian of the per-row loss, one row at a time."""
    k = a.shape[1]
    out = np.empty_like(a)
    for r in range(a.shape[0]):
        lab = labels[r]

        def f(x, lab=lab):
            rows = np.moveaxis(x, 0, -1).reshape(-1, k)
            y = np.broadcast_to(lab, (rows.shape[0],) + np.shape(lab))
            return bitempered_loss(rows, y, t1, t2, ls)[0].reshape(x.shape[1:])

        res = jacobian(f, a[r], initial_step=1e-3, tolerances={"atol": 1e-11})
        assert np.all(res.success)
        out[r] = res.df
    return out


@pytest.mark.parametrize(("t1", "t2"), LOSS_TEMPERATURES)
@pytest.mark.parametrize("ls", [0.0, 0.1])
def test_gradient_matches_finite_differences(t1, t2, ls):
    rng = _rng(7)
    a = rng.normal(scale=1.5, size=(3, 5))
    idx = rng.integers(0, 5, size=3)
    loss, grad = bitempered_loss(a, idx, t1, t2, ls)
    np.testing.assert_allclose(grad, _fd_gradient(a, idx, t1, t2, ls), rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(grad.sum(axis=1), 0.0, atol=1e-15)
    probs = rng.dirichlet(np.ones(5), size=3)
    loss_p, grad_p = bitempered_loss(a, probs, t1, t2, ls)
    np.testing.assert_allclose(grad_p, _fd_gradient(a, probs, t1, t2, ls), rtol=1e-7, atol=1e-9)
    # One-hot probability rows give the same as class indices.
    onehot = np.eye(5)[idx]
    l2, g2 = bitempered_loss(a, onehot, t1, t2, ls)
    np.testing.assert_allclose(l2, loss, rtol=1e-14)
    np.testing.assert_allclose(g2, grad, rtol=1e-13, atol=1e-16)


@pytest.mark.parametrize(("t1", "t2"), LOSS_TEMPERATURES)
def test_binary_path_matches_general_and_fd(t1, t2):
    rng = _rng(8)
    a = rng.normal(scale=3.0, size=40)
    y = rng.random(40)
    y[:20] = np.round(y[:20])
    loss, dloss = bitempered_loss_binary(a, y, t1, t2, 0.1)
    lg, gg = bitempered_loss(np.c_[np.zeros(40), a], np.c_[1 - y, y], t1, t2, 0.1)
    np.testing.assert_allclose(loss, lg, rtol=1e-13, atol=1e-15)
    np.testing.assert_allclose(dloss, gg[:, 1], rtol=1e-12, atol=1e-15)

    def f(x, y):
        # scipy evaluates only unconverged elements; y arrives subset alike.
        flat_x = x.ravel()
        flat_y = np.broadcast_to(y, x.shape).ravel()
        return bitempered_loss_binary(flat_x, flat_y, t1, t2, 0.1)[0].reshape(x.shape)

    res = derivative(f, a, args=(y,), initial_step=1e-3, tolerances={"atol": 1e-11})
    assert np.all(res.success)
    np.testing.assert_allclose(dloss, res.df, rtol=1e-7, atol=1e-9)


def test_t1_t2_one_is_cross_entropy():
    rng = _rng(9)
    a = rng.normal(scale=10.0, size=(50, 6))
    idx = rng.integers(0, 6, size=50)
    loss, grad = bitempered_loss(a, idx, 1.0, 1.0)
    # scipy's log_softmax computes a - logsumexp(a): absolute error of a few
    # ulps of max|a|, hence the atol.
    np.testing.assert_allclose(
        loss,
        -log_softmax(a, axis=1)[np.arange(50), idx],
        rtol=1e-12,
        atol=8 * np.finfo(float).eps * np.abs(a).max(),
    )
    # Where the true class has the largest activation, the closed form
    # -log p_c = log1p(sum_{i != c} exp(a_i - a_c)) is accurate to relative eps.
    top = np.argmax(a, axis=1) == idx
    assert top.sum() >= 5
    gaps = a[top] - a[top, idx[top]][:, None]
    gaps[np.arange(top.sum()), idx[top]] = -np.inf
    np.testing.assert_allclose(loss[top], np.log1p(np.exp(gaps).sum(axis=1)), rtol=1e-13)
    # A few ulps of 1 (both sides round probabilities near 1).
    np.testing.assert_allclose(
        grad, softmax(a, axis=1) - np.eye(6)[idx], rtol=0, atol=4 * np.finfo(float).eps
    )
    # With smoothing: cross-entropy against the smoothed labels minus their entropy.
    ls = 0.2
    y = (1 - ls) * np.eye(6)[idx] + ls / 6
    ce = -(y * log_softmax(a, axis=1)).sum(axis=1) + (y * np.log(y)).sum(axis=1)
    np.testing.assert_allclose(bitempered_loss(a, idx, 1.0, 1.0, ls)[0], ce, rtol=1e-11)


@pytest.mark.parametrize("t1", [0.0, 0.3, 0.8, 0.99])
def test_loss_bounds(t1):
    # L <= 1 / (1 - t1) for any probability label (module docstring); for a
    # one-hot label with p_true = 0 and all mass on one other class the loss
    # equals the bound: -log_t1(0) - (1 - 1) / (2 - t1) = 1 / (1 - t1).
    rng = _rng(10)
    bound = 1.0 / (1.0 - t1)
    for t2 in (0.5, 1.0, 1.5, 4.0):
        a = rng.normal(scale=30.0, size=(200, 4))
        idx = rng.integers(0, 4, size=200)
        for labels in (idx, rng.dirichlet(np.ones(4), size=200)):
            loss, _ = bitempered_loss(a, labels, t1, t2, 0.05)
            assert np.all(loss >= 0.0)
            assert np.all(loss <= bound * (1 + 1e-14))
    loss, _ = bitempered_loss(np.array([[-50.0, 0.0]]), np.array([0]), t1, 0.5)
    assert loss[0] == pytest.approx(bound, rel=1e-14)
    # A perfect prediction has zero loss: p = y at t2 = 0.5 (finite support).
    loss, _ = bitempered_loss(np.array([[0.0, -50.0, -60.0]]), np.array([0]), t1, 0.5)
    assert loss[0] == 0.0


@pytest.mark.parametrize(("t1", "t2"), LOSS_TEMPERATURES)
def test_loss_monotone_in_true_class_activation(t1, t2):
    # For one-hot labels (with smoothing the minimum is at p_true = y_true < 1).
    rng = _rng(11)
    base = rng.normal(size=5)
    grid = np.linspace(-20, 20, 401)
    a = np.tile(base, (grid.size, 1))
    a[:, 2] = grid
    loss, grad = bitempered_loss(a, np.full(grid.size, 2), t1, t2)
    assert np.all(grad[:, 2] <= 0.0)
    # Non-increasing up to rounding of the loss values themselves.
    assert np.all(np.diff(loss) <= 8 * np.finfo(float).eps * loss[:-1])


@pytest.mark.parametrize("t2", [1.0, 1.2, 2.0, 5.0])
def test_extreme_activations_are_finite_without_warnings(t2):
    a = np.array([[0.0, 1e8, -1e8], [1e8, -1e8, 0.0], [-1e8, -1e8, 1e8]])
    with warnings.catch_warnings(), np.errstate(all="raise"):
        warnings.simplefilter("error")
        for t1 in (0.0, 0.5, 0.8, 1.0):
            for labels in (np.array([0, 1, 2]), np.full((3, 3), 1 / 3)):
                loss, grad = bitempered_loss(a, labels, t1, t2, 0.1)
                assert np.all(np.isfinite(loss)) and np.all(np.isfinite(grad))
            lb, gb = bitempered_loss_binary(
                np.array([1e8, -1e8, 0.0]), np.array([0.0, 1.0, 1.0]), t1, t2
            )
            assert np.all(np.isfinite(lb)) and np.all(np.isfinite(gb))
        p = tempered_softmax(a, t2)
        assert not np.isnan(p).any()
        np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=1e-12)


def test_finite_support_never_nan():
    # t2 < 1 puts classes outside the support (p = 0); t1 = 1 then gives an
    # infinite loss for a true class there, never a NaN, and a finite gradient.
    a = np.array([[-50.0, 0.0, 1.0]])
    loss, grad = bitempered_loss(a, np.array([0]), 1.0, 0.5)
    assert np.isinf(loss[0]) and np.all(np.isfinite(grad))
    loss, grad = bitempered_loss(a, np.array([2]), 1.0, 0.5)
    assert np.isfinite(loss[0]) and np.all(np.isfinite(grad))


# ------------------------------------------------------------------ validation


def test_input_validation():
    a = np.zeros((2, 3))
    bad = a.copy()
    bad[0, 1] = np.nan
    with pytest.raises(ValueError, match="NaN"):
        tempered_softmax(bad, 1.2)
    bad[0, 1] = np.inf
    with pytest.raises(ValueError, match="infinite"):
        bitempered_loss(bad, [0, 1], 0.8, 1.2)
    with pytest.raises(ValueError, match="NaN"):
        bitempered_loss_binary(np.array([0.0, np.nan]), np.array([0, 1]), 0.8, 1.2)
    with pytest.raises(ValueError, match=r"t must be in \[0, 10\]"):
        tempered_normaliser(a, -0.1)
    with pytest.raises(ValueError, match=r"t1 must be in \[0, 1\]"):
        bitempered_loss(a, [0, 1], 1.5, 1.2)
    with pytest.raises(ValueError, match=r"t2 must be in \[0, 10\]"):
        bitempered_loss(a, [0, 1], 0.5, 11.0)
    with pytest.raises(ValueError, match=r"label_smoothing must be in \[0, 1\]"):
        bitempered_loss(a, [0, 1], 0.5, 1.2, label_smoothing=1.5)
    with pytest.raises(ValueError, match=r"t2 must be in"):
        bitempered_loss_binary(np.zeros(2), np.zeros(2), 0.5, np.nan)
    with pytest.raises(ValueError, match=r"labels must be in \[0, 2\]"):
        bitempered_loss(a, [0, 3], 0.8, 1.2)
    with pytest.raises(ValueError, match="whole numbers"):
        bitempered_loss(a, [0.5, 1.0], 0.8, 1.2)
    with pytest.raises(ValueError, match="sum to 1"):
        bitempered_loss(a, np.full((2, 3), 0.5), 0.8, 1.2)
    with pytest.raises(ValueError, match=">= 0"):
        bitempered_loss(a, np.array([[1.5, -0.5, 0.0]] * 2), 0.8, 1.2)
    with pytest.raises(ValueError, match="shape"):
        bitempered_loss(a, np.zeros((2, 4)), 0.8, 1.2)
    with pytest.raises(ValueError, match=r"in \[0, 1\]"):
        bitempered_loss_binary(np.zeros(2), np.array([0.0, 2.0]), 0.8, 1.2)
    with pytest.raises(ValueError, match="1-D"):
        tempered_softmax(np.zeros((2, 2, 2)), 1.0)
    with pytest.raises(TypeError, match="t1"):
        bitempered_loss(a, [0, 1], "x", 1.2)


def test_inputs_are_not_modified_and_read_only_ok():
    rng = _rng(12)
    a = rng.normal(size=(5, 4))
    a.flags.writeable = False
    a32 = a.astype(np.float32)[:, ::-1]  # other dtype and layout: converted once
    loss, _ = bitempered_loss(a, np.arange(5) % 4, 0.8, 1.2)
    p = tempered_softmax(a32, 1.2)
    np.testing.assert_allclose(p, tempered_softmax(a32.astype(np.float64), 1.2), rtol=0)
    assert not a.flags.writeable and loss.shape == (5,)


# ------------------------------------------------------------------- threading


def _workload():
    rng = _rng(13)
    k = 50
    n = 4 * PARALLEL_MIN_ELEMENTS // k  # above the parallel threshold
    a = rng.normal(scale=3.0, size=(n, k))
    y = rng.integers(0, k, size=n)
    return a, y


@pytest.mark.parametrize(("t2", "family"), [(1.3, "general"), (1.2, "blocked")])
def test_concurrent_calls_match_serial(t2, family):
    a, y = _workload()
    assert tk._kernel_family(a.shape[1], t2) == family
    expected_p = tempered_softmax(a, t2)
    expected_loss, expected_grad = bitempered_loss(a, y, 0.7, t2)
    # The serial builds give identical results (no cross-row reductions).
    p_serial = np.empty_like(a)
    tk._NORMALISE_KERNELS[family][0](a, t2, p_serial, np.empty(a.shape[0]), True, 0, len(a), 1)
    np.testing.assert_array_equal(p_serial, expected_p)
    loss_serial, grad_serial = np.empty(a.shape[0]), np.empty_like(a)
    tk._LOSS_KERNELS[family][0](
        a, y, np.empty((1, a.shape[1])), True, 0.7, t2, 0.0, False,
        np.empty(a.shape[0]), loss_serial, grad_serial, 0, len(a), 1,
    )  # fmt: skip
    np.testing.assert_array_equal(loss_serial, expected_loss)
    np.testing.assert_array_equal(grad_serial, expected_grad)

    failures = []

    def work():
        try:
            for _ in range(3):
                np.testing.assert_array_equal(tempered_softmax(a, t2), expected_p)
                loss, grad = bitempered_loss(a, y, 0.7, t2)
                np.testing.assert_array_equal(loss, expected_loss)
                np.testing.assert_array_equal(grad, expected_grad)
        except Exception as exc:  # noqa: BLE001 - reported below
            failures.append(exc)

    threads = [threading.Thread(target=work) for _ in range(4)]
    for th in threads:
        th.start()
    for th in threads:
        th.join()
    assert not failures, failures


def _run_python(code, env_extra, timeout=120):
    env = dict(os.environ, **env_extra)
    return subprocess.run(
        [sys.executable, "-c", textwrap.dedent(code)],
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
    )


def test_workqueue_layer_concurrent_threads_and_fork_do_not_abort():
    # numba's workqueue layer aborts the process on concurrent parallel
    # launches; our launch lock must prevent that.  Then fork and use the
    # kernels in the child.
    code = """
        import os, threading, numpy as np, numba
        from skbayeslogit.tempered_functions import tempered_softmax, bitempered_loss
        rng = np.random.default_rng(0)
        a = rng.normal(size=(4000, 50)); y = rng.integers(0, 50, 4000)
        ref = tempered_softmax(a, 1.3)
        assert numba.threading_layer() == "workqueue", numba.threading_layer()
        out = []
        def work():
            for _ in range(5):
                out.append(np.array_equal(tempered_softmax(a, 1.3), ref))
                bitempered_loss(a, y, 0.7, 1.3)
        ts = [threading.Thread(target=work) for _ in range(4)]
        [t.start() for t in ts]; [t.join() for t in ts]
        assert all(out) and len(out) == 20
        pid = os.fork()
        if pid == 0:
            ok = np.array_equal(tempered_softmax(a, 1.3), ref)
            os._exit(0 if ok else 3)
        _, status = os.waitpid(pid, 0)
        assert os.waitstatus_to_exitcode(status) == 0, status
        print("ok")
    """
    if not hasattr(os, "fork"):
        pytest.skip("needs os.fork")
    res = _run_python(code, {"NUMBA_THREADING_LAYER": "workqueue"})
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.strip() == "ok"


# --------------------------------------------------------------------- caching


def test_import_without_writable_cache_and_lazy_compilation():
    # Only the user-provided locator, pointed at a directory nobody (not even
    # root) can create: numba finds no cache location at all.
    code = """
        import skbayeslogit._kernels.tempered_rows as tr
        import skbayeslogit.tempered_functions as tf
        kernel = tr.normalise_general_serial
        assert kernel.signatures == [], "compiled at import"
        assert type(kernel._cache).__name__ == "NullCache"
        # One row of 20,000 classes: above the size below which calls take
        # the numpy path (config.NUMPY_MAX_ELEMENTS), so the kernel compiles.
        p = tf.tempered_softmax([[-1e12] * 19997 + [0.0, 1.0, 2.0]], 1.3)
        assert abs(p.sum() - 1) < 1e-14
        assert len(kernel.signatures) == 1
        print("ok")
    """
    res = _run_python(
        code,
        {
            "NUMBA_CACHE_DIR": "/proc/skbayeslogit-no-cache",
            "NUMBA_CACHE_LOCATOR_CLASSES": "UserProvidedCacheLocator",
        },
    )
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.strip() == "ok"


def test_few_compiled_signatures():
    # Every call above converted its inputs to the same dtypes and layout.
    kernels = [tempered_loss.binary_serial]
    for family in ("general", "blocked"):
        kernels += [tk._NORMALISE_KERNELS[family][0], tk._LOSS_KERNELS[family][0]]
    for kernel in kernels:
        assert len(kernel.signatures) <= 1, kernel.signatures


# ------------------------------------------------------------------ properties


_rows = st.integers(min_value=2, max_value=60).flatmap(
    lambda k: st.lists(st.floats(-50, 50, allow_nan=False), min_size=k, max_size=k)
)
_temps = st.sampled_from([0.0, 0.3, 0.8, 1.0, 1.1, 1.5, 2.5, 5.0])


@settings(max_examples=50, derandomize=True, deadline=None)
@given(row=_rows, t=_temps, shift=st.floats(-1e3, 1e3))
def test_property_sum_and_shift(row, t, shift):
    a = np.array([row])
    p = tempered_softmax(a, t)
    np.testing.assert_allclose(p.sum(), 1.0, rtol=1e-12)
    np.testing.assert_allclose(tempered_softmax(a + shift, t), p, atol=1e-11)


@settings(max_examples=50, derandomize=True, deadline=None)
@given(
    row=_rows,
    t1=st.sampled_from([0.0, 0.5, 0.9, 1.0]),
    t2=st.sampled_from([1.0, 1.3, 2.0, 4.0]),
    ls=st.sampled_from([0.0, 0.1]),
    c=st.integers(0, 1),
)
def test_property_gradient_matches_central_differences(row, t1, t2, ls, c):
    a = np.array([row]) / 10.0
    _, grad = bitempered_loss(a, [c], t1, t2, ls)
    h = 1e-6
    k = a.shape[1]
    plus = a + h * np.eye(k)
    minus = a - h * np.eye(k)
    lp = bitempered_loss(plus, np.full(k, c), t1, t2, ls)[0]
    lm = bitempered_loss(minus, np.full(k, c), t1, t2, ls)[0]
    # Central differences: truncation O(h^2) ~ 1e-12, rounding ~ eps/h ~ 1e-10.
    np.testing.assert_allclose(grad[0], (lp - lm) / (2 * h), atol=1e-8)


def test_serial_kernels_context_keeps_large_calls_in_this_thread(monkeypatch):
    # Inside serial_kernels() a call above the parallel threshold runs the
    # serial build (a pass on worker threads must not start numba's threads
    # on the same cores); outside it, the parallel build.
    import numba

    from skbayeslogit._kernels.config import serial_kernels

    if numba.get_num_threads() < 2:
        pytest.skip("one numba thread: every launch is serial")
    a, _ = _workload()
    calls = []
    serial, parallel = tk._NORMALISE_KERNELS["general"]

    def spy(name, kernel):
        def run(*args):
            calls.append(name)
            return kernel(*args)

        return run

    monkeypatch.setitem(
        tk._NORMALISE_KERNELS, "general", (spy("serial", serial), spy("parallel", parallel))
    )
    expected = tempered_softmax(a, 1.3)
    with serial_kernels():
        np.testing.assert_array_equal(tempered_softmax(a, 1.3), expected)
    assert calls == ["parallel", "serial"]
