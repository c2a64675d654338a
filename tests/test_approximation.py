"""check_approximation against exact posteriors by scipy quadrature.

Exact posteriors of 1- and 2-parameter Bayesian logistic (and probit)
regressions are computed by Simpson's rule (``scipy.integrate.simpson``) on
a fine grid; the corrected summaries of the check must lie closer to them
than the Laplace ones and within 0.1 posterior sd whenever the Pareto k is
below the threshold (Vehtari, Simpson, Gelman, Yao & Gabry, JMLR 2024).
"""

import functools

import numpy as np
import pytest
from scipy.integrate import cumulative_trapezoid, simpson
from scipy.special import log_expit, log_ndtr
from sklearn.base import clone

from skbayeslogit import LaplaceLogisticClassifier, ProbitClassifier

PRIOR = 3.0


def _data(n, slope, intercept=0.0, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((n, 1))
    y = (rng.random(n) < 1.0 / (1.0 + np.exp(-(slope * x[:, 0] + intercept)))).astype(int)
    return x, y


def _log_post(model, x, y, slopes, intercepts):
    """Exact unnormalised log posterior on a grid of (slope, intercept)."""
    s = 2.0 * y - 1.0
    eta = slopes[..., None] * x[:, 0] + intercepts[..., None]
    link = log_ndtr if isinstance(model, ProbitClassifier) else log_expit
    lp = link(s * eta).sum(axis=-1) - 0.5 * slopes**2 / PRIOR**2
    if model.fit_intercept:
        lp = lp - 0.5 * intercepts**2 / model.intercept_prior_scale**2
    return lp


def _marginal_summary(grid, density):
    """Mean, sd, 5% and 95% quantiles of a 1-D density on a grid (Simpson / trapezoid)."""
    density = density / simpson(density, x=grid)
    mean = simpson(grid * density, x=grid)
    sd = np.sqrt(simpson((grid - mean) ** 2 * density, x=grid))
    cdf = cumulative_trapezoid(density, grid, initial=0.0)
    q05, q95 = np.interp([0.05, 0.95], cdf / cdf[-1], grid)
    return np.array([mean, sd, q05, q95])


def exact_summaries(model, x, y):
    """(p, 4) exact mean, sd, q05, q95 of each parameter, by quadrature on a grid."""
    m, sd = model.posterior_mean_, np.sqrt(np.diag(model.posterior_cov_))
    if not model.fit_intercept:
        grid = np.linspace(m[0] - 25 * sd[0], m[0] + 25 * sd[0], 20001)
        lp = _log_post(model, x, y, grid, np.zeros_like(grid))
        dens = np.exp(lp - lp.max())
        assert max(dens[0], dens[-1]) < 1e-12  # the grid holds all the mass
        return _marginal_summary(grid, dens)[None, :]
    gs = np.linspace(m[0] - 14 * sd[0], m[0] + 14 * sd[0], 401)
    gb = np.linspace(m[1] - 14 * sd[1], m[1] + 14 * sd[1], 401)
    S, B = np.meshgrid(gs, gb, indexing="ij")
    lp = _log_post(model, x, y, S, B)
    dens = np.exp(lp - lp.max())
    edge = max(dens[0].max(), dens[-1].max(), dens[:, 0].max(), dens[:, -1].max())
    assert edge < 1e-10
    return np.array(
        [
            _marginal_summary(gs, simpson(dens, x=gb, axis=1)),
            _marginal_summary(gb, simpson(dens, x=gs, axis=0)),
        ]
    )


def _summaries(table):
    return table[["estimate", "sd", "lower", "upper"]].to_numpy()


CASES = [
    # (model, n, slope, intercept): small, moderate and nearly separated data.
    (LaplaceLogisticClassifier(prior_scale=PRIOR, fit_intercept=False), 10, 1.0, 0.0),
    (LaplaceLogisticClassifier(prior_scale=PRIOR, fit_intercept=False), 30, 3.0, 0.0),
    (LaplaceLogisticClassifier(prior_scale=PRIOR, fit_intercept=False), 30, 6.0, 0.0),
    (LaplaceLogisticClassifier(prior_scale=PRIOR, intercept_prior_scale=PRIOR), 15, 1.0, 0.5),
    (LaplaceLogisticClassifier(prior_scale=PRIOR, intercept_prior_scale=PRIOR), 30, 6.0, 1.0),
    (ProbitClassifier(prior_scale=PRIOR, intercept_prior_scale=PRIOR), 30, 3.0, 0.5),
]

# 32,000 draws (cheap at these n): the Monte Carlo sd of a 5% / 95% quantile
# from weighted draws is about 2.1 sd / sqrt(ESS) (a normal's
# sqrt(0.05 * 0.95) / 0.103), under 0.02 sd here.
N_DRAWS = 32_000


@functools.cache
def _errors(model, n, slope, intercept, n_draws=N_DRAWS):
    """Corrected and Laplace errors (p, 4) in exact posterior sd, and the check.

    Cached: both tests below read the same run of each case.
    """
    x, y = _data(n, slope, intercept)
    model = clone(model).fit(x, y)
    exact = exact_summaries(model, x, y)
    check = model.check_approximation(x, y, n_draws=n_draws, random_state=1)
    scale = exact[:, 1:2]
    corrected = np.abs(_summaries(check.coef_table(0.9)) - exact) / scale
    laplace = np.abs(_summaries(model.coef_table(0.9)) - exact) / scale
    return corrected, laplace, check


@pytest.mark.parametrize("model, n, slope, intercept", CASES)
def test_corrected_closer_than_laplace(model, n, slope, intercept):
    corrected, laplace, check = _errors(model, n, slope, intercept)
    assert check.reliable, check.pareto_k  # measured: k from 0.34 to 0.44
    # Wherever Laplace is off by more than the Monte Carlo error (0.05 sd).
    visible = laplace > 0.05
    assert visible.any()
    assert np.all(corrected[visible] < laplace[visible]), (corrected, laplace)


# The n = 15 case has k between 0.44 and 0.6 (over seeds): at k near 0.5 the
# variance of the weights is barely finite, the ESS overstates what the draws
# tell about a tail quantile, and the error bound above does not hold. Its
# 95% quantile of the slope, where Laplace is off by 0.74 sd, measured 0.03
# to 0.11 sd from quadrature at 32,000 draws over seeds 1-6 (0.113 at seed
# 1) and 0.015 to 0.058 sd at 128,000; Vehtari et al. (2024, Sec. 3) say
# convergence slows as k grows toward 0.7. So that case is checked at
# 128,000 draws, with the same tolerance.
SLOW_CASE_DRAWS = 128_000


@pytest.mark.parametrize("model, n, slope, intercept", CASES)
def test_corrected_within_a_tenth_sd(model, n, slope, intercept):
    n_draws = SLOW_CASE_DRAWS if n == 15 else N_DRAWS
    corrected, _, check = _errors(model, n, slope, intercept, n_draws)
    assert check.reliable
    assert corrected.max() < 0.1, (corrected, check.pareto_k)


def test_sampler_against_quadrature():
    """refine="always" on a skewed 2-parameter posterior: means and bounds match quadrature.

    Tolerance: four Monte Carlo standard errors, from the exact density at
    each quantile, sqrt(p (1 - p) / ESS_tail) / f(q) (the asymptotic sd of
    a sample quantile), and sd / sqrt(ESS_bulk) for the mean.
    """
    x, y = _data(30, 6.0, 1.0)
    model = LaplaceLogisticClassifier(prior_scale=PRIOR, intercept_prior_scale=PRIOR).fit(x, y)
    exact = exact_summaries(model, x, y)
    check = model.check_approximation(x, y, random_state=3, refine="always")
    assert check.method == "sampler" and np.all(check.rhat < 1.01)
    got = _summaries(check.coef_table(0.9))
    sd = exact[:, 1]
    # A normal density at the 5% point is 0.103 / sd; the skew here makes the
    # true density differ, so the tolerance uses the smaller of 0.06 / sd.
    q_se = np.sqrt(0.05 * 0.95 / check.ess_tail.to_numpy()) * sd / 0.06
    mean_se = sd / np.sqrt(check.ess_bulk.to_numpy())
    assert np.all(np.abs(got[:, 0] - exact[:, 0]) < 4 * mean_se)
    assert np.all(np.abs(got[:, 2] - exact[:, 2]) < 4 * q_se)
    assert np.all(np.abs(got[:, 3] - exact[:, 3]) < 4 * q_se)


def test_large_data_is_reliable():
    """n = 20,000, d = 5: k small, no mean moved by more than 0.05 sd."""
    rng = np.random.default_rng(1)
    X = rng.standard_normal((20_000, 5))
    y = (rng.random(20_000) < 1.0 / (1.0 + np.exp(-X @ rng.normal(0, 0.5, 5)))).astype(int)
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
    check = model.check_approximation(X, y, n_draws=4000, random_state=0)
    # Measured in development: k = 0.18; the Laplace error of a mean is
    # O(1 / sqrt(n)) and the Monte Carlo error about 1 / sqrt(ESS) = 0.016 sd.
    assert check.reliable and check.pareto_k < 0.4
    assert np.abs(check.mean_shift).max() < 0.05
    assert "agrees" in check.verdict


def test_near_separation_raises_k():
    """n = 30 with a strong effect: k well above the large-data value."""
    rng = np.random.default_rng(1)
    X = rng.standard_normal((30, 5))
    y = (4.0 * X[:, 0] + 0.3 * rng.standard_normal(30) > 0).astype(int)
    model = LaplaceLogisticClassifier(prior_scale=3.0).fit(X, y)
    check = model.check_approximation(X, y, random_state=0)
    # Measured in development: k = 0.59 here against 0.18 at n = 20,000,
    # and the largest mean shift 1.06 sd.
    assert check.pareto_k > 0.45
    assert np.abs(check.mean_shift).max() > 0.3


def test_same_seed_same_result_and_layout():
    x, y = _data(30, 3.0, 0.5)
    model = LaplaceLogisticClassifier(prior_scale=PRIOR).fit(x, y)
    a = model.check_approximation(x, y, n_draws=500, random_state=7, refine="always")
    b = model.check_approximation(x, y, n_draws=500, random_state=7, refine="always")
    c = model.check_approximation(x, y, n_draws=500, random_state=8)
    assert np.array_equal(a.draws, b.draws) and a.pareto_k == b.pareto_k
    assert not np.array_equal(a.draws[:500], c.draws)
    # random_state goes through the package's as_generator: a RandomState
    # seeds as its int would, a Generator is used as it is.
    d = model.check_approximation(x, y, n_draws=500, random_state=np.random.RandomState(8))
    assert np.array_equal(c.draws, d.draws) and c.pareto_k == d.pareto_k
    e, f = (
        model.check_approximation(x, y, n_draws=500, random_state=np.random.default_rng(5))
        for _ in range(2)
    )
    assert np.array_equal(e.draws, f.draws)
    ours, theirs = a.coef_table(0.8), model.coef_table(0.8)
    assert ours.index.equals(theirs.index) and list(ours.columns) == list(theirs.columns)
    P = a.predict_proba(x)
    assert P.shape == (30, 2) and np.allclose(P.sum(axis=1), 1.0)
    lo, hi = a.predict_interval(x, 0.9)
    assert np.all((lo <= P[:, 1]) & (P[:, 1] <= hi))


def test_multiclass_layout():
    from sklearn.datasets import load_iris

    X, y = load_iris(return_X_y=True)
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
    check = model.check_approximation(X, y, n_draws=500, random_state=0)
    assert check.coef_table().index.equals(model.coef_table().index)
    P = check.predict_proba(X[:5])
    assert P.shape == (5, 3) and np.allclose(P.sum(axis=1), 1.0)
    lo, hi = check.predict_interval(X[:5])
    assert lo.shape == (5, 3) and np.all(lo <= hi)
    # Zero-sum intercepts under the flat intercept prior stay zero-sum in every draw.
    assert np.allclose(check.draws[:, -3:].sum(axis=1), 0.0, atol=1e-9)


def test_bad_input_messages():
    x, y = _data(20, 1.0)
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(x, y)
    with pytest.raises(ValueError, match="label 7"):
        model.check_approximation(x, np.where(y == 1, 7, 0))
    with pytest.raises(ValueError, match="n_draws"):
        model.check_approximation(x, y, n_draws=10)
    with pytest.raises(ValueError, match="refine"):
        model.check_approximation(x, y, refine="yes")
    with pytest.raises(ValueError, match="one label per row"):
        model.check_approximation(x, y[:5])
    with pytest.raises(ValueError, match="^random_state must be"):
        model.check_approximation(x, y, random_state="seed")
    with pytest.raises(ValueError, match="^refine must be"):
        model.check_approximation(x, y, refine=1)  # 1 == True, but not a flag
    with pytest.raises(ValueError, match="sample_weight"):
        model.check_approximation(x, y, sample_weight=-np.ones(20))


def test_integer_weights_are_repeated_rows():
    """Weight 2 on every row is the same exact posterior as every row twice."""
    x, y = _data(20, 2.0, 0.5)
    w = np.full(20, 2.0)
    weighted = LaplaceLogisticClassifier(prior_scale=PRIOR).fit(x, y, sample_weight=w)
    doubled = LaplaceLogisticClassifier(prior_scale=PRIOR).fit(np.vstack([x, x]), np.tile(y, 2))
    a = weighted.check_approximation(x, y, sample_weight=w, n_draws=1000, random_state=4)
    b = doubled.check_approximation(np.vstack([x, x]), np.tile(y, 2), n_draws=1000, random_state=4)
    assert a.pareto_k == pytest.approx(b.pareto_k, abs=1e-6)
    assert np.allclose(a.coef_table(), b.coef_table(), rtol=1e-6, atol=1e-9)


def test_accessor_checks_the_standardised_fit():
    """df.bayeslogit.check_approximation: the fitted model's check on its own features.

    Reference: the same model fitted by hand on scikit-learn's StandardScaler
    output (population sd, as the accessor's standardisation), checked with
    the same seed: the same posterior, so the same k and corrected table.
    """
    from sklearn.preprocessing import StandardScaler

    from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots

    df = make_orchard_lots(150, random_state=0)
    # The reference sees the numeric columns only (by name the accessor would
    # also encode the orchard column, issue 18).
    model = df.bayeslogit.fit(TARGET, list(FEATURES))
    check = df.bayeslogit.check_approximation(TARGET, model, n_draws=1000, random_state=2)
    Z = StandardScaler().fit_transform(df[list(FEATURES)].to_numpy(dtype=float))
    by_hand = LaplaceLogisticClassifier().fit(Z, df[TARGET])
    ref = by_hand.check_approximation(Z, df[TARGET], n_draws=1000, random_state=2)
    assert check.pareto_k == pytest.approx(ref.pareto_k, abs=1e-6)
    got, want = check.coef_table().to_numpy(), ref.coef_table().to_numpy()
    assert np.allclose(got, want, rtol=1e-6, atol=1e-9)
    assert check.verdict.startswith("The fast (Laplace) posterior")


def test_accessor_bad_arguments():
    from sklearn.dummy import DummyClassifier

    from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots

    df = make_orchard_lots(60, random_state=0)
    with pytest.raises(ValueError, match="^n_draws must be"):
        df.bayeslogit.check_approximation(TARGET, n_draws=10)
    with pytest.raises(TypeError, match="unexpected argument.*draws"):
        df.bayeslogit.check_approximation(TARGET, draws=1000)
    plain = DummyClassifier().fit(df[list(FEATURES)], df[TARGET])
    with pytest.raises(TypeError, match="Laplace posterior.*DummyClassifier"):
        df.bayeslogit.check_approximation(TARGET, plain)
