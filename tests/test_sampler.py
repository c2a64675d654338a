"""The refinement sampler's parts: the whitened logistic gradient, the stopping rule, ranks.

References: the gradient against the package's general likelihood path and
against central finite differences (a second-order formula: its error is
of order h^2 times the third derivative); average ranks against
``scipy.stats.rankdata``; the stopping rule against its own definition.
"""

import numpy as np
import pytest
from scipy.stats import rankdata
from sklearn.datasets import load_breast_cancer
from sklearn.preprocessing import StandardScaler

from skbayeslogit import LaplaceLogisticClassifier
from skbayeslogit._fit import convergence, importance_target
from skbayeslogit._fit.convergence import chain_diagnostics, ess_bulk, ess_tail, split_rhat
from skbayeslogit._fit.hmc import run_chains
from skbayeslogit._linear.threads import passes_own_threads


def _cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return StandardScaler().fit_transform(X), y


@pytest.mark.parametrize(
    "options",
    [{}, {"fit_intercept": False}, {"intercept_prior_scale": 2.0}],
)
def test_whitened_gradient_matches_general_path(options, monkeypatch):
    X, y = _cancer()
    w = np.random.default_rng(0).integers(0, 3, len(y)).astype(float)  # weights 0, 1, 2
    model = LaplaceLogisticClassifier(prior_scale=1.0, **options).fit(X, y, sample_weight=w)
    U = np.random.default_rng(1).standard_normal((5, model.posterior_mean_.size))
    with passes_own_threads():
        fast = model._exact_posterior(X, y, w)
        value, grad = fast.value_grad(U)
        assert fast._whitened is not None  # the shortcut was taken
        monkeypatch.setattr(importance_target, "fits_in_memory", lambda *a: False)
        general = model._exact_posterior(X, y, w)
        value0, grad0 = general.value_grad(U)
    # Both sum the same terms in another order: rounding only.
    assert np.allclose(value, value0, rtol=1e-12, atol=0)
    assert np.allclose(grad, grad0, rtol=1e-10, atol=1e-10 * np.abs(grad0).max())
    # Central differences along one coordinate: h = 1e-4 in u (sd units);
    # truncation ~h^2 |f'''| and rounding ~1e-16 |f| / h, both below 1e-5 here.
    h, j = 1e-4, 3
    step = np.zeros_like(U)
    step[:, j] = h
    with passes_own_threads():
        numeric = (fast.value_grad(U + step)[0] - fast.value_grad(U - step)[0]) / (2 * h)
    assert np.allclose(grad[:, j], numeric, rtol=1e-6, atol=1e-5)


def test_average_ranks_as_scipy():
    """Ranks with ties (rejections repeat draws) are scipy's 'average' ranks."""
    rng = np.random.default_rng(2)
    rows = np.round(rng.standard_normal((3, 200)), 1)  # many ties
    rows[1] = 0.5  # all tied
    assert np.array_equal(convergence._average_ranks(rows), rankdata(rows, axis=1))
    distinct = rng.standard_normal((2, 1000))
    assert np.array_equal(convergence._average_ranks(distinct), rankdata(distinct, axis=1))


def test_shared_diagnostics_equal_the_three_functions():
    x = np.random.default_rng(3).standard_normal((6, 81, 4))
    x[:, 1::2] = x[:, ::2][:, :40]  # repeated draws, as after rejections
    rhat, bulk, tail = chain_diagnostics(x)
    assert np.array_equal(rhat, split_rhat(x))
    assert np.array_equal(bulk, ess_bulk(x))
    assert np.array_equal(tail, ess_tail(x))
    one = chain_diagnostics(x[:, :, 0])
    assert all(isinstance(v, float) for v in one)


def _small_target():
    rng = np.random.default_rng(4)
    X = rng.standard_normal((40, 3))
    y = (X[:, 0] + rng.standard_normal(40) > 0).astype(int)
    model = LaplaceLogisticClassifier(prior_scale=2.0).fit(X, y)
    return model._exact_posterior(X, y, None)


def test_stopping_rule():
    target = _small_target()
    with passes_own_threads():
        # A target reached at once: the minimum length.
        draws, info = run_chains(target, np.random.default_rng(0), 4, 20, 50, 400, tail_ess=10)
        assert draws.shape == (4, 50, 4) and info["draws_per_chain"] == 50
        # No target: the maximum.
        draws, info = run_chains(target, np.random.default_rng(0), 4, 20, 50, 120, tail_ess=None)
        assert draws.shape == (4, 120, 4)
        # A target out of reach: the maximum, and its tail ESS is below it.
        draws, info = run_chains(target, np.random.default_rng(0), 4, 20, 50, 90, tail_ess=1e6)
        assert info["draws_per_chain"] == 90
        # A reachable one: stops at or above it, between the bounds.
        draws, info = run_chains(target, np.random.default_rng(0), 4, 20, 50, 2000, tail_ess=800)
        assert 50 < info["draws_per_chain"] < 2000
        assert np.nanmin(ess_tail(draws)) >= 800
