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


def test_standardized_wrapper_checks_its_estimator():
    """StandardizedClassifier.check_approximation is its wrapped estimator's check.

    Reference: the same estimator fitted by hand on scikit-learn's
    StandardScaler output (population sd, as the wrapper's), checked with
    the same seed on the same rows and weights: the same posterior, so the
    same k and corrected table; predictions take recorded units.
    """
    from sklearn.preprocessing import StandardScaler

    from skbayeslogit.standardized import StandardizedClassifier

    rng = np.random.default_rng(3)
    X = rng.normal([5.0, -200.0, 0.01], [2.0, 50.0, 0.003], size=(60, 3))
    y = (X[:, 0] - 5 + rng.standard_normal(60) > 0).astype(int)
    wrapped = StandardizedClassifier(LaplaceLogisticClassifier(prior_scale=1.0)).fit(X, y)
    check = wrapped.check_approximation(X, y, n_draws=800, random_state=5)
    Z = StandardScaler().fit_transform(X)
    by_hand = LaplaceLogisticClassifier(prior_scale=1.0).fit(Z, y)
    ref = by_hand.check_approximation(Z, y, n_draws=800, random_state=5)
    assert check.pareto_k == pytest.approx(ref.pareto_k, abs=1e-6)
    assert np.allclose(check.coef_table(), ref.coef_table(), rtol=1e-6, atol=1e-9)
    assert np.allclose(check.predict_proba(X), ref.predict_proba(Z), rtol=1e-6, atol=1e-9)
    lo, hi = check.predict_interval(X)
    assert np.allclose(lo, ref.predict_interval(Z)[0], rtol=1e-6, atol=1e-9)
    # Only when the wrapped estimator has a Laplace posterior.
    from skbayeslogit import TemperedLogisticClassifier

    tempered = StandardizedClassifier(TemperedLogisticClassifier()).fit(X, y)
    assert not hasattr(tempered, "check_approximation")


def _weighted_frame():
    from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots

    df = make_orchard_lots(120, random_state=4)
    df["w"] = np.random.default_rng(0).integers(1, 4, len(df)).astype(float)
    return df, list(FEATURES), TARGET


def test_frame_model_check_uses_its_rows_and_weights():
    """FrameModel.check_approximation: the final estimator's check on the encoded rows, weighted.

    Reference: the final StandardizedClassifier checked by hand on the
    encoded columns with the weight column as sample_weight (same seed);
    and the accessor's check of the same fitted model.
    """
    df, features, target = _weighted_frame()
    model = df.bayeslogit.fit(target, features, weight="w")
    check = model.check_approximation(df, n_draws=600, random_state=1)
    final = model.pipeline_[-1]
    ref = final.check_approximation(
        model.transform(df),
        df[target].to_numpy(),
        sample_weight=df["w"].to_numpy(),
        n_draws=600,
        random_state=1,
    )
    assert check.pareto_k == pytest.approx(ref.pareto_k, abs=1e-6)
    assert np.allclose(check.coef_table(), ref.coef_table(), rtol=1e-6, atol=1e-9)
    # Unweighted, the posterior differs: the weights were used.
    unweighted = final.check_approximation(
        model.transform(df), df[target].to_numpy(), n_draws=600, random_state=1
    )
    assert not np.allclose(check.coef_table()["estimate"], unweighted.coef_table()["estimate"])
    accessor = df.bayeslogit.check_approximation(target, model, n_draws=600, random_state=1)
    assert accessor.pareto_k == pytest.approx(check.pareto_k, abs=1e-12)
    # Predictions take the table.
    assert np.allclose(check.predict_proba(df), ref.predict_proba(model.transform(df)))


def test_approximation_verdict():
    """The report's sentence and table: the figures the check holds, oriented as the model."""
    from skbayeslogit._frame.approximation import approximation_verdict

    x, y = _data(2000, 1.0, 0.3)
    model = LaplaceLogisticClassifier(prior_scale=PRIOR).fit(x, y)
    good = model.check_approximation(x, y, n_draws=1000, random_state=0)
    sentence, table = approximation_verdict(good)
    assert good.reliable and table is None
    assert sentence.startswith("The fast (Laplace) posterior agrees")
    assert f"k = {good.pareto_k:.2f}" in sentence and f"{good.threshold:.2f}" in sentence

    # scikit-learn's breast-cancer data, standardised, prior sd 3: k 1.13 at
    # 2,200 draws (benchmarks/README.md), far above the threshold.
    from sklearn.datasets import load_breast_cancer
    from sklearn.preprocessing import StandardScaler

    X, yy = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    bad_model = LaplaceLogisticClassifier(prior_scale=3.0).fit(X, yy)
    bad = bad_model.check_approximation(X, yy, n_draws=1000, random_state=0)
    assert not bad.reliable
    sentence, table = approximation_verdict(bad, level=0.8)
    assert "does not match" in sentence and "importance sampling" in sentence
    assert f"{bad.ess:,.0f} of 1,000" in sentence
    shift = float(np.abs(bad.mean_shift).max())
    assert f"{shift:.2f} sd" in sentence
    assert table.attrs["method"] == "importance sampling"
    assert np.allclose(table.to_numpy(), bad.coef_table(0.8).to_numpy())

    refined = bad_model.check_approximation(X, yy, n_draws=1000, random_state=0, refine=True)
    sentence, table = approximation_verdict(refined)
    assert "sampler" in sentence and table.attrs["method"] == "sampler"
    assert f"{refined.rhat.max():.3f}" in sentence


def test_verdict_table_turned_to_the_positive_class():
    """A FrameModel whose positive class is classes_[0]: signs and bounds flipped."""
    from skbayeslogit._frame.approximation import approximation_verdict

    df, features, target = _weighted_frame()
    classes = sorted(df[target].unique())
    model = df.bayeslogit.fit(target, features, positive=classes[0])
    assert model.positive_index_ == 0
    check = model.check_approximation(df, n_draws=300, random_state=0)
    check.reliable = False  # force the table: the orientation is what is tested
    _, table = approximation_verdict(check, model)
    raw = check.coef_table()
    assert np.allclose(table["estimate"], -raw["estimate"])
    assert np.allclose(table["lower"], -raw["upper"])
    assert table.attrs["positive_class"] == classes[0]
