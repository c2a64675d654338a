"""StandardizedClassifier: a fit on standardised features, reported on both scales."""

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.preprocessing import StandardScaler

from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots
from skbayeslogit.laplace import LaplaceLogisticClassifier
from skbayeslogit.standardized import StandardizedClassifier


@pytest.fixture(scope="module")
def data():
    df = make_orchard_lots(300, random_state=6)
    return df[list(FEATURES)], df[TARGET].to_numpy(dtype=object)


def test_matches_a_fit_on_standard_scaler_output(data):
    X, y = data
    m = StandardizedClassifier(LaplaceLogisticClassifier(prior_scale=0.5)).fit(X, y)
    scaler = StandardScaler().fit(X)
    np.testing.assert_allclose(m.center_, scaler.mean_, rtol=1e-12)
    np.testing.assert_allclose(m.scale_, scaler.scale_, rtol=1e-12)
    Z = pd.DataFrame(scaler.transform(X), columns=list(FEATURES))
    ref = LaplaceLogisticClassifier(prior_scale=0.5).fit(Z, y)
    np.testing.assert_allclose(m.predict_proba(X), ref.predict_proba(Z), rtol=1e-9)
    lo, hi = m.predict_interval(X, level=0.7)
    rlo, rhi = ref.predict_interval(Z, level=0.7)
    np.testing.assert_allclose(lo, rlo, rtol=1e-9)
    np.testing.assert_allclose(hi, rhi, rtol=1e-9)
    # The original-scale coefficients give the same latent predictor on raw X.
    eta = X.to_numpy() @ m.coef_.ravel() + m.intercept_[0]
    np.testing.assert_allclose(eta, ref.logit_moments(Z)[0], rtol=1e-9, atol=1e-10)


def test_original_scale_posterior_is_the_linear_map_of_draws(data):
    X, y = data
    m = StandardizedClassifier(LaplaceLogisticClassifier(prior_scale=1.0)).fit(X, y)
    n = 20000
    draws = m.sample_coef(n, random_state=0)
    # Monte Carlo check of the stated mean and sd, within five standard
    # errors: sd / sqrt(n) for a mean, about 1 / sqrt(2 n) relative for an sd.
    sd = np.sqrt(np.diag(m.posterior_cov_))
    assert np.all(np.abs(draws.mean(axis=0) - m.posterior_mean_) < 5 * sd / np.sqrt(n))
    table = m.coef_table(0.9, scale="original")
    np.testing.assert_allclose(table["estimate"], m.posterior_mean_, rtol=1e-12)
    np.testing.assert_allclose(table["sd"], sd, rtol=1e-12)
    np.testing.assert_allclose(np.std(draws, axis=0), sd, rtol=5 / np.sqrt(2 * n))


def test_coef_table_scales(data):
    X, y = data
    m = StandardizedClassifier(LaplaceLogisticClassifier(prior_scale=1.0)).fit(X, y)
    both = m.coef_table(0.8)
    std = m.coef_table(0.8, scale="standardized")
    orig = m.coef_table(0.8, scale="original")
    pd.testing.assert_frame_equal(both[list(std.columns)], std, check_flags=False)
    pd.testing.assert_frame_equal(
        both[[f"{c}_original" for c in orig.columns]].set_axis(orig.columns, axis=1), orig
    )
    # Slopes keep their sign probability across scales.
    np.testing.assert_allclose(std["sign_prob"].iloc[:-1], orig["sign_prob"].iloc[:-1])
    assert both.attrs == {"level": 0.8, "scale": "both"}
    with pytest.raises(ValueError, match="scale must be"):
        m.coef_table(scale="log")


def test_without_intercept_features_are_scaled_not_centred(data):
    X, y = data
    m = StandardizedClassifier(
        LaplaceLogisticClassifier(prior_scale=1.0, fit_intercept=False)
    ).fit(X, y)
    np.testing.assert_array_equal(m.center_, 0.0)
    eta = X.to_numpy() @ m.coef_.ravel()
    np.testing.assert_allclose(np.sign(eta) > 0, m.predict(X) == m.classes_[1])


def test_is_a_scikit_learn_estimator(data):
    X, y = data
    est = StandardizedClassifier(LaplaceLogisticClassifier(prior_scale=1.0))
    twin = clone(est)
    assert twin.get_params()["estimator__prior_scale"] == 1.0
    m = est.fit(X.to_numpy(), y)  # arrays work too, with no feature names
    assert not hasattr(m, "feature_names_in_") and m.n_features_in_ == len(FEATURES)
    assert m.score(X.to_numpy(), y) > 0.5
    with pytest.raises(ValueError, match="features"):
        m.predict(X.to_numpy()[:, :3])
    with pytest.raises(TypeError, match="scikit-learn style classifier"):
        StandardizedClassifier("laplace").fit(X, y)
