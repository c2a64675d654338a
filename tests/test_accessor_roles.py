"""The accessor's front door (issue 18): column roles, categorical encoding,
positive class, weights, missing values, unseen levels and column evidence.

References (no hard-coded numbers): statsmodels ``Logit`` on the same
treatment-coded design (maximum likelihood, observed-information standard
errors); scikit-learn ``LogisticRegression(C=s**2)`` on the same one-hot
design (the same penalised objective as a N(0, s^2) prior on each slope with
a flat intercept); scipy's normal densities for the Savage-Dickey ratio;
a fit on repeated rows for frequency weights.
"""

import pickle
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import multivariate_normal, norm
from sklearn.base import clone
from sklearn.linear_model import LogisticRegression

import skbayeslogit.accessor as acc
from skbayeslogit._frame.errors import FrameInputError, UnseenLevelWarning
from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots

NUMERIC = ["firmness_n", "starch_index", "bruise_share_pct"]
# Newton's method to a gradient of ~1e-12 on both sides; the fits agree far
# below this (measured ~1e-10 on these data), so 1e-8 leaves room for the
# conditioning of a five-level design without hiding a different objective.
TOL = 1e-8


@pytest.fixture(scope="module")
def lots():
    return make_orchard_lots(300, random_state=4)


def _treatment_design(df, reference):
    """Numeric columns, then the orchard levels but the reference, then a constant."""
    dummies = pd.get_dummies(df["orchard"], prefix="orchard", prefix_sep="=", dtype=float)
    dummies = dummies.drop(columns=f"orchard={reference}")
    X = pd.concat([df[NUMERIC].astype(float), dummies], axis=1)
    return X.assign(const=1.0)


def test_no_prior_equals_statsmodels_logit_with_treatment_coding(lots):
    sm = pytest.importorskip("statsmodels.api")
    model = lots.bayeslogit.fit(TARGET, [*NUMERIC, "orchard"], prior_scale=None, standardize=False)
    reference = model.reference_levels_["orchard"]
    assert reference == lots["orchard"].value_counts().idxmax()
    X = _treatment_design(lots, reference)
    y = (lots[TARGET] == "long_storage").astype(float)
    ref = sm.Logit(y, X).fit(disp=0, tol=1e-12, maxiter=100)
    table = model.coef_table(0.9)
    assert list(table.index) == [*X.columns[:-1], "intercept"]
    np.testing.assert_allclose(table["estimate"], ref.params.to_numpy(), rtol=TOL, atol=TOL)
    np.testing.assert_allclose(table["sd"], ref.bse.to_numpy(), rtol=TOL, atol=TOL)
    # Standardised, the original-scale half is the same maximum-likelihood fit.
    std = lots.bayeslogit.fit(TARGET, [*NUMERIC, "orchard"], prior_scale=None).coef_table()
    np.testing.assert_allclose(std["estimate_original"], ref.params, rtol=1e-6, atol=1e-8)


def test_prior_equals_sklearn_on_the_one_hot_design(lots):
    s = 0.8
    model = lots.bayeslogit.fit(TARGET, [*NUMERIC, "orchard"], prior_scale=s, standardize=False)
    dummies = pd.get_dummies(lots["orchard"], prefix="orchard", prefix_sep="=", dtype=float)
    X = pd.concat([lots[NUMERIC].astype(float), dummies], axis=1)
    assert list(model.feature_names_out_) == list(X.columns)  # every level kept
    ref = LogisticRegression(C=s**2, solver="newton-cholesky", tol=1e-12, max_iter=200)
    ref.fit(X.to_numpy(), lots[TARGET].to_numpy(dtype=object))
    np.testing.assert_allclose(model.coef_[0], ref.coef_[0], rtol=1e-6, atol=1e-7)
    np.testing.assert_allclose(model.intercept_, ref.intercept_, rtol=1e-6, atol=1e-7)


def _messy(lots):
    """An ID, a text column, a weight column and the label in German."""
    df = lots.copy()
    df["Case No"] = np.arange(1000, 1000 + len(df))
    df["note"] = [f"free text {i % 40}" for i in range(len(df))]  # 40 > max_levels
    df["count"] = np.tile([1, 2, 3], len(df) // 3 + 1)[: len(df)]
    df["kept"] = np.where(df[TARGET] == "long_storage", "ja", "nein")
    return df.drop(columns=TARGET)


def test_roles_of_an_id_a_text_column_and_a_copy_of_the_label(lots):
    df = _messy(lots)
    model = df.bayeslogit.fit("kept", weight="count", prior_scale=1.0)
    roles = model.columns_.set_index("column")["role"]
    assert roles["lot_id"] == "id" and roles["Case No"] == "id"
    assert roles["note"] == "left out" and roles["count"] == "weight"
    assert roles["orchard"] == "feature" and "Case No" not in model.feature_names_in_
    copy = df.assign(grade_copy=df["kept"].map({"ja": "A", "nein": "B"}))
    with pytest.raises(FrameInputError, match="'grade_copy' is one-to-one with the target"):
        copy.bayeslogit.fit("kept")
    assert copy.bayeslogit.fit("kept", exclude=["grade_copy"], prior_scale=1.0).n_features_in_


def test_weights_equal_repeated_rows(lots):
    df = _messy(lots)
    weighted = df.bayeslogit.fit("kept", weight="count", prior_scale=1.0, standardize=False)
    repeated = df.loc[df.index.repeat(df["count"])].drop(columns="count")
    plain = repeated.bayeslogit.fit("kept", exclude=["lot_id", "Case No", "note"],
                                    prior_scale=1.0, standardize=False)  # fmt: skip
    np.testing.assert_allclose(weighted.coef_, plain.coef_, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(weighted.posterior_cov_, plain.posterior_cov_, rtol=1e-8)


def test_a_chosen_positive_class_orients_every_table(lots):
    df = _messy(lots)
    default = df.bayeslogit.fit("kept", prior_scale=1.0)
    assert default.positive_ == "nein"  # scikit-learn's classes_[1]
    model = df.bayeslogit.fit("kept", positive="ja", prior_scale=1.0)
    assert list(model.classes_) == ["ja", "nein"] and model.positive_ == "ja"
    table = df.bayeslogit.predict_table(model, level=0.8)
    assert "prob_ja" in table and "prob_nein" not in table
    P = model.predict_proba(df)
    np.testing.assert_allclose(table["prob_ja"], P[:, 0], rtol=1e-12)
    lo, hi = default.predict_interval(df, level=0.8)
    # The same posterior: the bounds of P(ja) are one minus those of P(nein).
    np.testing.assert_allclose(table["prob_ja_lower"], 1 - hi, rtol=1e-10)
    np.testing.assert_allclose(table["prob_ja_upper"], 1 - lo, rtol=1e-10)
    conf = df.bayeslogit.confusion("kept", model)
    called, truth = P[:, 0] >= 0.5, df["kept"].to_numpy() == "ja"
    assert conf.index[0] == "ja" and conf["tp"].iloc[0] == np.sum(called & truth)
    assert conf["fp"].iloc[0] == np.sum(called & ~truth)
    flipped = model.coef_table()
    np.testing.assert_allclose(flipped["estimate"], -default.coef_table()["estimate"], rtol=1e-9)
    assert flipped.attrs["positive_class"] == "ja"
    again = df.bayeslogit.confusion("kept", default, positive="ja")
    np.testing.assert_array_equal(again[["tp", "fp", "fn", "tn"]], conf[["tp", "fp", "fn", "tn"]])


def _gappy(lots):
    df = lots.copy()
    df.loc[[2, 5], "firmness_n"] = np.nan
    df.loc[[5, 9], "orchard"] = np.nan
    return df


def test_missing_values_in_the_three_modes(lots):
    df = _gappy(lots)
    feats = [*NUMERIC, "orchard"]
    with pytest.raises(FrameInputError, match="3 of 300 rows.*firmness_n: 2, orchard: 2"):
        df.bayeslogit.fit(TARGET, feats)
    with pytest.warns(acc.DroppedRowsWarning, match="dropped 3 of 300"):
        dropped = df.bayeslogit.fit(TARGET, feats, missing="drop", prior_scale=1.0)
    assert dropped.rows_dropped_ == 3
    with pytest.warns(acc.DroppedRowsWarning, match="dropped 3 of 300"):
        alias = df.bayeslogit.fit(TARGET, feats, dropna=True, prior_scale=1.0)
    np.testing.assert_array_equal(alias.coef_, dropped.coef_)
    complete = df.drop(index=[2, 5, 9]).bayeslogit.fit(TARGET, feats, prior_scale=1.0)
    np.testing.assert_allclose(dropped.coef_, complete.coef_, rtol=1e-12)
    imputed = df.bayeslogit.fit(TARGET, feats, missing="impute", prior_scale=1.0)
    assert imputed.rows_dropped_ == 0 and imputed.imputed_ == {"firmness_n": 2, "orchard": 2}
    filled = df.assign(
        firmness_n=df["firmness_n"].fillna(df["firmness_n"].median()),
        orchard=df["orchard"].fillna(df["orchard"].value_counts().idxmax()),
    )
    ref = filled.bayeslogit.fit(TARGET, feats, prior_scale=1.0)
    np.testing.assert_allclose(imputed.coef_, ref.coef_, rtol=1e-10)
    table = df.bayeslogit.predict_table(imputed)
    assert len(table) == 300 and table.attrs["rows_dropped"] == 0
    with pytest.raises(FrameInputError, match="missing must be one of"):
        df.bayeslogit.fit(TARGET, feats, missing="fill")


def test_unseen_levels_are_counted_not_an_error(lots):
    model = lots.bayeslogit.fit(TARGET, [*NUMERIC, "orchard"], prior_scale=1.0)
    new = lots.head(6).assign(orchard=["Hillcrest", "Lake Farm", "Lake Farm", *["Old Mill"] * 3])
    with pytest.warns(UnseenLevelWarning, match="orchard: 2"):
        table = new.bayeslogit.predict_table(model)
    assert table.attrs["unseen_levels"] == {"orchard": 2}
    # An unseen level contributes no level's coefficient: all its columns are 0.
    Z = model.transform(new)
    assert not Z.filter(like="orchard=").iloc[1:3].to_numpy().any()


def test_column_evidence_per_original_column(lots):
    model = lots.bayeslogit.fit(TARGET, [*NUMERIC, "orchard"], prior_scale=1.0)
    table = lots.bayeslogit.column_evidence(TARGET, model)
    assert list(table.index) == [*NUMERIC, "orchard"]
    levels = model.groups_["orchard"]
    assert table.loc["orchard", "n_parameters"] == len(levels) == lots["orchard"].nunique()
    # Savage-Dickey by scipy's densities, on the scale the prior acts on
    # (standardised): posterior density of the levels at 0 over the prior's.
    inner = model.estimator_
    names = list(inner.feature_names_in_)
    idx = [names.index(c) for c in levels]
    m, S = inner.posterior_mean_[idx], inner.posterior_cov_[np.ix_(idx, idx)]
    log_bf = multivariate_normal(m, S).logpdf(np.zeros(len(idx))) - len(idx) * norm.logpdf(0, 0, 1)
    assert table.loc["orchard", "log10_bf_no_effect"] == pytest.approx(log_bf / np.log(10), 1e-10)
    by_name = lots.bayeslogit.column_evidence(
        TARGET, features=[*NUMERIC, "orchard"], prior_scale=1.0
    )
    pd.testing.assert_frame_equal(by_name, table)
    refit = lots.bayeslogit.column_evidence(TARGET, model, refit=True)
    assert list(refit.index) == list(table.index) and set(refit["method"]) == {"evidence ratio"}


def test_the_fitted_object_clones_and_pickles(lots):
    model = lots.bayeslogit.fit(TARGET, positive="early_sale", prior_scale=1.0)
    again = pickle.loads(pickle.dumps(model))
    np.testing.assert_array_equal(again.predict_proba(lots), model.predict_proba(lots))
    assert again.positive_ == "early_sale" and again.groups_ == model.groups_
    fresh = clone(model)
    assert not hasattr(fresh, "pipeline_") and fresh.get_params()["positive"] == "early_sale"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        refit = fresh.fit(lots)
    np.testing.assert_allclose(refit.predict_proba(lots), model.predict_proba(lots), rtol=1e-12)
    assert list(refit.feature_names_in_) == [*FEATURES, "orchard"]
