"""ParameterLayout against the parameter vector's layout written out by hand.

The reference is the documented order of ``posterior_mean_`` (DESIGN.md and
the estimators' docstrings): the q coefficient rows one after the other
(class k, feature j at k * d + j), then the q intercepts. Every expected
array below is built element by element from that rule, not by the class
under test.
"""

import numpy as np
import pandas as pd
import pytest

from skbayeslogit import LaplaceLogisticClassifier
from skbayeslogit._linear.layout import ParameterLayout

CASES = [(1, 3, True), (1, 3, False), (4, 3, True), (4, 3, False), (3, 1, True)]


@pytest.mark.parametrize(("q", "d", "fit_intercept"), CASES)
def test_split_join_and_index_follow_the_documented_order(q, d, fit_intercept):
    layout = ParameterLayout(q, d, fit_intercept)
    p = q * d + (q if fit_intercept else 0)
    assert layout.p_full == p and layout.n_coef == q * d
    theta = np.arange(p, dtype=float) + 0.5
    W, b = layout.split(theta)
    for k in range(q):
        for j in range(d):
            assert W[k, j] == theta[k * d + j]
            assert layout.index(np.array(k), np.array(j)) == k * d + j
        if fit_intercept:
            assert b[k] == theta[q * d + k]
            assert layout.index(np.array(k), np.array(d)) == q * d + k
        else:
            assert b[k] == 0.0
    np.testing.assert_array_equal(layout.join(W, b), theta)
    np.testing.assert_array_equal(layout.slopes(theta), theta[: q * d])
    np.testing.assert_array_equal(layout.intercepts(theta), theta[q * d :])


def test_names_binary_and_multiclass():
    binary = ParameterLayout(1, 2, True).names(["a", "b"], ["no", "yes"])
    pd.testing.assert_index_equal(binary, pd.Index(["a", "b", "intercept"], name="parameter"))
    multi = ParameterLayout(3, 2, True).names(["a", "b"], ["x", "y", "z"])
    expected = [(c, f) for c in "xyz" for f in "ab"] + [(c, "intercept") for c in "xyz"]
    pd.testing.assert_index_equal(
        multi, pd.MultiIndex.from_tuples(expected, names=["class", "parameter"])
    )
    assert list(ParameterLayout(1, 2, False).names(["a", "b"], [0, 1])) == ["a", "b"]


def test_prior_precision_by_hand():
    layout = ParameterLayout(2, 3, True)
    expected = np.array([0.25] * 6 + [1 / 9] * 2)  # slopes sd 2, intercepts sd 3
    np.testing.assert_allclose(layout.prior_precision(2.0, 3.0), expected)
    np.testing.assert_array_equal(layout.prior_precision(None, None), np.zeros(8))
    np.testing.assert_allclose(layout.prior_precision(2.0), [0.25] * 6 + [0.0, 0.0])


def test_free_map_binary_is_the_identity():
    assert ParameterLayout(1, 4, True).free_map(True, False) is None
    assert ParameterLayout(1, 4, True).free_map(False, False) is None


def test_free_map_multiclass_without_slope_prior_fixes_the_first_class():
    q, d = 3, 2
    layout = ParameterLayout(q, d, True)
    # Hand-built T: unit columns at every parameter but class 0's slopes
    # (0, 1) and class 0's intercept (q * d = 6).
    free = [2, 3, 4, 5, 7, 8]
    T = np.zeros((q * d + q, len(free)))
    for col, row in enumerate(free):
        T[row, col] = 1.0
    np.testing.assert_array_equal(layout.free_map(False, False), T)
    np.testing.assert_array_equal(layout.free_mask(), np.isin(np.arange(9), free))


def test_free_map_multiclass_flat_intercepts_sum_to_zero():
    q, d = 4, 3
    layout = ParameterLayout(q, d, True)
    T = layout.free_map(True, False)
    assert T.shape == (q * d + q, q * d + q - 1)
    # Slopes pass through unchanged: the identity block by hand.
    np.testing.assert_array_equal(T[: q * d, : q * d], np.eye(q * d))
    np.testing.assert_array_equal(T[: q * d, q * d :], 0.0)
    np.testing.assert_array_equal(T[q * d :, : q * d], 0.0)
    # The intercept block: orthonormal columns, each summing to zero, so the
    # intercepts T phi always sum to zero and no free direction is lost.
    B = T[q * d :, q * d :]
    np.testing.assert_allclose(B.T @ B, np.eye(q - 1), atol=1e-12)
    np.testing.assert_allclose(B.sum(axis=0), 0.0, atol=1e-12)


def test_free_map_multiclass_with_both_priors_or_no_intercept_is_the_identity():
    assert ParameterLayout(3, 2, True).free_map(True, True) is None
    assert ParameterLayout(3, 2, False).free_map(True, False) is None


def test_of_estimator_reads_coef_and_intercept_flag():
    rng = np.random.default_rng(0)
    X = rng.standard_normal((60, 2))
    y = np.repeat([0, 1, 2], 20)
    model = LaplaceLogisticClassifier(prior_scale=1.0, fit_intercept=False).fit(X, y)
    assert ParameterLayout.of_estimator(model) == ParameterLayout(3, 2, False)
    W, _ = ParameterLayout.of_estimator(model).split(model.posterior_mean_)
    np.testing.assert_array_equal(W, model.coef_)
