"""Numerical extremes: rescaled features, huge logits, separation, collinearity.

References: the unscaled fit of the same model (a linear model is
equivariant: features times s, slopes divided by s, with the prior sd
divided by s as well), the Albert & Anderson (Biometrika 71, 1984)
conditions for separation, and closed forms stated in each test.
"""

import warnings

import numpy as np
import pytest

from skbayeslogit import (
    CollinearityWarning,
    LaplaceLogisticClassifier,
    ProbitClassifier,
    SeparationWarning,
    TemperedLogisticClassifier,
)

CLASSES = {
    "laplace": LaplaceLogisticClassifier,
    "probit": ProbitClassifier,
    "tempered": TemperedLogisticClassifier,
}

RNG = np.random.default_rng(8)
N = 100
X = RNG.normal(size=(N, 3))
Y2 = (X[:, 0] - 0.5 * X[:, 1] + RNG.normal(size=N) > 0).astype(int)
Y3 = np.argmax(X @ np.array([[1.0, 0, -1], [0, 1, 0], [0.5, 0, 0]]) + RNG.gumbel(size=(N, 3)), 1)

SCALE_CASES = [
    (name, k, prior)
    for name in CLASSES
    for k in (2, 3)
    for prior in (None, 1.0, "auto")
    if not (name == "probit" and k == 3) and not (name == "tempered" and prior == "auto")
]


@pytest.mark.parametrize("scale", [1e-8, 1e8])
@pytest.mark.parametrize(("name", "k", "prior"), SCALE_CASES)
def test_rescaled_features_rescale_the_coefficients(name, k, prior, scale):
    """fit(s X) has coef / s and the same intercept and probabilities.

    A fixed prior sd is divided by s too (the prior acts on the slopes in
    the units of the features). Newton is affine invariant, and the tempered
    model's L-BFGS runs on centred, unit-spread columns, so both follow the
    unscaled path up to rounding: measured 1e-15 relative for fixed priors.
    "auto" searches log10(prior sd) on a grid centred on 1 / median feature
    sd, which shifts by exactly log10(s); Brent's bounded search then meets
    rounding-level differences that it can amplify up to its xatol of 1e-3
    in log10 only when the evidence is flat, measured 5e-8 here: 1e-6 bounds
    both with a margin.
    """
    y = Y2 if k == 2 else Y3
    cls = CLASSES[name]
    ref = cls(prior_scale=prior).fit(X, y)
    scaled_prior = prior / scale if isinstance(prior, float) else prior
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # nothing to warn about: same problem
        fit = cls(prior_scale=scaled_prior).fit(X * scale, y)
    # Tempered: L-BFGS's many small steps amplify the rounding differences of
    # the scaled columns to a measured 6e-11 (multiclass); the stopping test
    # alone would allow tol / curvature ~ 1e-5.
    rtol = 1e-6 if prior == "auto" else 1e-8 if name == "tempered" else 1e-12
    top = np.max(np.abs(ref.coef_))
    np.testing.assert_allclose(fit.coef_ * scale, ref.coef_, rtol=0, atol=rtol * top)
    np.testing.assert_allclose(fit.intercept_, ref.intercept_, rtol=0, atol=rtol * top)
    np.testing.assert_allclose(
        fit.predict_proba(X * scale), ref.predict_proba(X), rtol=0, atol=10 * rtol
    )
    if prior == "auto":
        assert fit.prior_scale_ * scale == pytest.approx(ref.prior_scale_, rel=1e-6)
    if name != "tempered":
        # Posterior sd of a slope scales as 1 / s as well.
        sd_ref = ref.coef_table()["sd"].to_numpy()
        sd_fit = fit.coef_table()["sd"].to_numpy()
        n_coef = ref.coef_.size
        np.testing.assert_allclose(sd_fit[:n_coef] * scale, sd_ref[:n_coef], rtol=10 * rtol)


@pytest.mark.parametrize("name", list(CLASSES))
def test_logits_of_1e4_give_finite_saturated_predictions(name):
    """Rows whose linear predictor is +-1e4 (at the MAP).

    Plug-in probabilities are 0 and 1 in float64, and the log-probabilities
    stay finite: the likely class's is 0 to within rounding, the unlikely
    one's about -|eta| (logistic: log sigma(-z) -> -z), -z^2 / 2 (probit)
    or -5 log(0.2 z) (tempered, t2 = 1.2: p ~ ((t2 - 1) z)^(-1 / (t2 - 1))).
    The Bayesian predictive of the Laplace and probit models does not
    saturate there: the latent variance grows as the square of the row, so
    kappa(v) m tends to a constant; it must still be finite, proper, and on
    the side of the MAP.
    """
    kw = {} if name == "tempered" else {"predictive": "map"}
    model = CLASSES[name](prior_scale=1.0, **kw).fit(X, Y2)
    w = model.coef_[0]
    direction = w / (w @ w)
    rows = np.outer([1e4, -1e4], direction) - model.intercept_[0] * direction
    eta = rows @ w + model.intercept_[0]
    np.testing.assert_allclose(eta, [1e4, -1e4], rtol=1e-12)
    # Underflow (exp(-1e4) -> 0) is expected and harmless; overflow,
    # invalid operations and log(0) are not.
    with warnings.catch_warnings(), np.errstate(over="raise", invalid="raise", divide="raise"):
        warnings.simplefilter("error")
        P = model.predict_proba(rows)
        logP = model.predict_log_proba(rows)
        scores = model.decision_function(rows)
    np.testing.assert_allclose(P.sum(axis=1), 1.0, rtol=0, atol=1e-15)
    assert P[0, 1] == 1.0 and P[1, 0] == 1.0
    assert np.all(np.isfinite(scores)) and scores[0] > 0 > scores[1]
    assert np.all(np.isfinite(logP))
    assert logP[0, 1] == pytest.approx(0.0, abs=1e-12)
    assert logP[1, 0] == pytest.approx(0.0, abs=1e-12)
    expected = {
        "laplace": -1e4,
        "probit": -0.5e8 - np.log(1e4 * np.sqrt(2 * np.pi)),  # Mills ratio tail
        "tempered": -5.0 * np.log(0.2 * 1e4),
    }[name]
    np.testing.assert_allclose(logP[[0, 1], [0, 1]], expected, rtol=1e-3)
    if name != "tempered":
        bayes = CLASSES[name](prior_scale=1.0).fit(X, Y2)
        with warnings.catch_warnings(), np.errstate(over="raise", invalid="raise", divide="raise"):
            warnings.simplefilter("error")
            Pb = bayes.predict_proba(rows)
            lo, hi = bayes.predict_interval(rows)
        np.testing.assert_allclose(Pb.sum(axis=1), 1.0, rtol=0, atol=1e-15)
        assert Pb[0, 1] > 0.5 > Pb[1, 1]
        assert np.all(np.isfinite(lo)) and np.all((0 <= lo) & (lo <= hi) & (hi <= 1))


def _complete():
    x = np.linspace(-3, 3, 40)
    z = np.random.default_rng(1).normal(size=40)
    return np.column_stack([x, z]), (x > 0).astype(int)


def _quasi():
    # Class 1 exactly when x > 0, with a tie at x = 0 carrying both labels:
    # quasi-complete separation (Albert & Anderson 1984).
    x = np.r_[np.linspace(-3, -0.1, 20), 0.0, 0.0, np.linspace(0.1, 3, 20)]
    y = np.r_[np.zeros(20), 0, 1, np.ones(20)].astype(int)
    z = np.random.default_rng(1).normal(size=len(x))
    return np.column_stack([x, z]), y


@pytest.mark.parametrize("data", [_complete, _quasi], ids=["complete", "quasi-complete"])
@pytest.mark.parametrize("name", ["laplace", "probit"])
def test_separation_without_prior_warns_and_a_prior_fixes_it(name, data):
    Xs, ys = data()
    with pytest.warns(SeparationWarning, match="does not exist"):
        CLASSES[name](prior_scale=None).fit(Xs, ys)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model = CLASSES[name](prior_scale=1.0).fit(Xs, ys)
    assert np.all(np.isfinite(model.coef_)) and np.all(np.isfinite(model.posterior_cov_))
    # The prior bounds the slope: the objective at slope b is at least
    # b^2 / 2 and at 0 it is n log 2 (logit) or n log 2 (probit, Phi(0) =
    # 1/2), so |b| <= sqrt(2 n log 2) = 7.4 for n = 40.
    assert np.max(np.abs(model.coef_)) <= np.sqrt(2 * len(ys) * np.log(2))
    assert model.coef_[0, 0] > 0  # in the separating direction
    P = model.predict_proba(Xs)
    assert np.all(np.isfinite(P)) and np.all((P > 0) & (P < 1))


@pytest.mark.parametrize("data", [_complete, _quasi], ids=["complete", "quasi-complete"])
@pytest.mark.parametrize("prior", [None, 1.0])
def test_separation_tempered_stays_finite(data, prior):
    """The bounded loss (t1 < 1) has no incentive to push separated rows to
    infinity beyond the point where their loss is ~0; without a penalty the
    fit is still finite, and the convex start is capped (tempered.py)."""
    Xs, ys = data()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a ConvergenceWarning is allowed
        model = TemperedLogisticClassifier(prior_scale=prior).fit(Xs, ys)
    assert np.all(np.isfinite(model.coef_)) and np.all(np.isfinite(model.intercept_))
    P = model.predict_proba(Xs)
    assert np.all(np.isfinite(P)) and np.allclose(P.sum(axis=1), 1.0)
    assert np.mean(model.predict(Xs) == ys) >= 0.95


def _near_collinear():
    rng = np.random.default_rng(5)
    x3 = X[:, 0] + 1e-6 * rng.normal(size=N)
    return np.column_stack([X, x3])


def test_near_collinear_columns_have_condition_1e12():
    # The premise of the next tests: the scaled X^T X of the two columns has
    # condition number about 1 / (1e-6)^2 = 1e12 (eigenvalues 2 and ~1e-12 / 2).
    Z = _near_collinear()[:, [0, 3]]
    Z = Z / np.linalg.norm(Z, axis=0)
    cond = np.linalg.cond(Z.T @ Z)
    assert 1e11 < cond < 1e14


@pytest.mark.parametrize("name", ["laplace", "probit"])
def test_near_collinear_without_prior_warns_with_the_columns(name):
    with pytest.warns(CollinearityWarning, match="x0|x3"):
        model = CLASSES[name](prior_scale=None).fit(_near_collinear(), Y2)
    assert np.all(np.isfinite(model.coef_))


@pytest.mark.parametrize("name", list(CLASSES))
def test_near_collinear_with_prior_is_the_duplicate_split(name):
    """With a prior the near-duplicate pair behaves like an exact duplicate:
    equal halves (the prior's minimum-norm split), to within the effect of
    the 1e-6 difference between the columns. The reference is the merged
    single column sqrt(2) x0 (see test_bad_input's duplicate-column test)."""
    kw = {"tol": 1e-8} if name == "tempered" else {}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model = CLASSES[name](prior_scale=1.0, **kw).fit(_near_collinear(), Y2)
    merged_X = X.copy()
    merged_X[:, 0] *= np.sqrt(2.0)
    merged = CLASSES[name](prior_scale=1.0, **kw).fit(merged_X, Y2)
    half = merged.coef_[0, 0] / np.sqrt(2.0)
    # The columns differ by 1e-6 noise: the split moves by O(1e-6) / curvature.
    np.testing.assert_allclose(model.coef_[0, [0, 3]], half, rtol=0, atol=1e-4)
    if name != "tempered":
        cov = model.posterior_cov_
        assert np.all(np.isfinite(cov)) and np.allclose(cov, cov.T, rtol=0, atol=1e-14)
        assert np.linalg.eigvalsh(cov).min() > 0


def test_extreme_sample_weights_are_handled():
    """Weights 1e300 (the likelihood overwhelms the prior: the MLE) and
    1e-300 (the prior overwhelms the likelihood: slopes ~ 0) for every model:
    finite and in the right limit; never NaN."""
    mle = LaplaceLogisticClassifier(prior_scale=None).fit(X, Y2)
    for name, cls in CLASSES.items():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # a ConvergenceWarning is allowed
            big = cls(prior_scale=1.0).fit(X, Y2, sample_weight=np.full(N, 1e300))
            small = cls(prior_scale=1.0).fit(X, Y2, sample_weight=np.full(N, 1e-300))
        for model in (big, small):
            assert np.all(np.isfinite(model.coef_)), name
            assert np.all(np.isfinite(model.predict_proba(X))), name
        assert np.max(np.abs(small.coef_)) < 1e-250, name
        if name == "laplace":
            np.testing.assert_allclose(big.coef_, mle.coef_, rtol=1e-8)
