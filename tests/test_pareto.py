"""Generalised Pareto tail fit, Pareto smoothing, R-hat and ESS against known answers.

References: draws with a known tail shape from scipy.stats (genpareto,
expon, halfcauchy); for the diagnostics, independent normal draws (R-hat 1,
ESS = number of draws) and AR(1) chains, whose ESS is
S (1 - rho) / (1 + rho) (integrated autocorrelation time of an AR(1)
process; Geyer, Statistical Science 7, 1992).
"""

import numpy as np
import pytest
from scipy import stats

from skbayeslogit._fit.convergence import ess_bulk, ess_tail, split_rhat
from skbayeslogit._fit.pareto import (
    fit_generalized_pareto,
    pareto_smooth,
    sample_size_threshold,
    tail_length,
)

N_TAIL = 4000


def _tolerance(k, n):
    """Four asymptotic sds of the shape's maximum-likelihood estimate, 4 (1 + k) / sqrt(n).

    The variance (1 + k)^2 / n holds for k > -1/2 (Smith, "Estimating tails
    of probability distributions", Annals of Statistics 15, 1987); Zhang &
    Stephens' estimator is as efficient in their simulations (Technometrics
    51, 2009, Sec. 4).
    """
    return 4.0 * (1.0 + k) / np.sqrt(n)


@pytest.mark.parametrize("shape", [-0.3, 0.2, 0.5, 0.8])
def test_shape_of_generalized_pareto_draws(shape):
    x = stats.genpareto(shape, scale=2.0).rvs(N_TAIL, random_state=np.random.default_rng(1))
    k, sigma = fit_generalized_pareto(x)
    assert abs(k - shape) < _tolerance(shape, N_TAIL)
    assert sigma > 0


def test_exponential_tail_has_shape_zero():
    x = stats.expon(scale=3.0).rvs(N_TAIL, random_state=np.random.default_rng(2))
    k, sigma = fit_generalized_pareto(x)
    assert abs(k) < _tolerance(0.0, N_TAIL)
    # The exponential's scale is the GPD scale at k = 0; the scale's sd at
    # k = 0 is sigma sqrt(2 / n) (Smith 1987), 0.067 here; four of them.
    assert abs(sigma - 3.0) < 4 * 3.0 * np.sqrt(2.0 / N_TAIL)


def test_half_cauchy_tail_has_shape_one():
    # |Cauchy| has P(X > x) ~ 2 / (pi x): a power tail of index 1, so its
    # exceedances over a high threshold approach a GPD with k = 1.
    x = stats.halfcauchy.rvs(size=20 * N_TAIL // 4, random_state=np.random.default_rng(3))
    u = np.quantile(x, 0.8)
    k, _ = fit_generalized_pareto(x[x > u] - u)
    assert abs(k - 1.0) < _tolerance(1.0, int(np.sum(x > u)))


def test_pareto_smoothing_of_known_ratios():
    """Ratios with a GPD tail of shape 0.6: k recovered, weights normalised and capped."""
    S = 40_000
    ratios = stats.genpareto(0.6).rvs(S, random_state=np.random.default_rng(4))
    weights, k = pareto_smooth(np.log(ratios))
    M = tail_length(S)
    # The smoothing's estimate is pulled toward 0.5 by 10 pseudo-draws
    # (Vehtari et al. 2024): expected (M 0.6 + 5) / (M + 10).
    expected = (M * 0.6 + 5.0) / (M + 10.0)
    assert abs(k - expected) < _tolerance(0.6, M)
    assert np.isclose(weights.sum(), 1.0)
    order = np.argsort(ratios)
    # The order of the draws is kept, the body (all but the M largest) keeps
    # its raw proportions, and no smoothed ratio exceeds the largest raw one.
    assert np.all(np.diff(weights[order]) >= 0)
    body = order[:-M]
    scale = weights[body[0]] / ratios[body[0]]
    assert np.allclose(weights[body], scale * ratios[body], rtol=1e-12)
    assert weights.max() <= scale * ratios.max() * (1 + 1e-12)


def test_threshold_and_tail_length():
    # min(1 - 1 / log10(S), 0.7) and M = ceil(min(S / 5, 3 sqrt(S))) (Vehtari et al. 2024).
    assert sample_size_threshold(100) == pytest.approx(0.5)
    assert sample_size_threshold(1000) == pytest.approx(2.0 / 3.0)
    assert sample_size_threshold(100_000) == 0.7
    assert tail_length(100) == 20 and tail_length(10_000) == 300


def test_rhat_and_ess_of_independent_draws():
    x = np.random.default_rng(5).standard_normal((4, 1000))
    assert abs(split_rhat(x) - 1.0) < 0.01
    # For independent draws the ESS estimate's own spread is about 5% of S
    # (measured over seeds in development); 15% allowed.
    assert abs(ess_bulk(x) / 4000 - 1.0) < 0.15
    assert abs(ess_tail(x) / 4000 - 1.0) < 0.15


def test_ess_of_autocorrelated_chains():
    rng = np.random.default_rng(6)
    rho, n = 0.9, 4000
    x = np.zeros((4, n))
    for t in range(1, n):
        x[:, t] = rho * x[:, t - 1] + rng.standard_normal(4)
    expected = 4 * n * (1 - rho) / (1 + rho)  # 842
    # The estimate of an integrated autocorrelation time from 4 x 4000 draws
    # at rho = 0.9 spreads by about 10% (measured over seeds); 25% allowed.
    assert abs(ess_bulk(x) / expected - 1.0) < 0.25
    assert split_rhat(x) < 1.02


def test_rhat_flags_stuck_and_shifted_chains():
    rng = np.random.default_rng(7)
    shifted = rng.standard_normal((4, 1000))
    shifted[0] += 2.0  # one chain in another place
    assert split_rhat(shifted) > 1.1
    trend = rng.standard_normal((4, 1000)) + np.linspace(0, 3, 1000)  # not stationary
    assert split_rhat(trend) > 1.1
    stuck = rng.standard_normal((4, 1000))
    stuck[1] = 0.3  # one chain never moves
    assert split_rhat(stuck) > 1.1
    assert np.isnan(split_rhat(np.ones((4, 100))))


def test_vectorised_diagnostics_match_single():
    x = np.random.default_rng(8).standard_normal((4, 200, 3))
    for func in (split_rhat, ess_bulk, ess_tail):
        together = func(x)
        assert np.allclose(together, [func(x[:, :, j]) for j in range(3)])
