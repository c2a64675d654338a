"""Tests of the df.bayeslogit accessor against scikit-learn's own metrics.

References used (never hard-coded numbers): sklearn.metrics.confusion_matrix,
recall_score, precision_score, accuracy_score, brier_score_loss, log_loss;
sklearn.calibration.calibration_curve; sklearn.model_selection.cross_validate
with the same StratifiedKFold; pandas.cut for an independent binning.
"""

import copy
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import calibration_curve
from sklearn.metrics import (
    accuracy_score,
    brier_score_loss,
    confusion_matrix,
    log_loss,
    make_scorer,
    precision_score,
    recall_score,
)
from sklearn.model_selection import StratifiedKFold, cross_validate

import skbayeslogit.accessor as acc
from skbayeslogit.datasets import FEATURES, TARGET, make_orchard_lots, orchard_ground_truth
from skbayeslogit.laplace import LaplaceLogisticClassifier
from skbayeslogit.standardized import StandardizedClassifier

RTOL = 1e-12


@pytest.fixture(scope="module")
def df2():
    return make_orchard_lots(400, random_state=3)


@pytest.fixture(scope="module")
def df3():
    return make_orchard_lots(400, n_classes=3, random_state=3)


@pytest.fixture(scope="module")
def m2(df2):
    return df2.bayeslogit.fit(TARGET, list(FEATURES))


@pytest.fixture(scope="module")
def m3(df3):
    # Seeded: multiclass credible bounds are Monte Carlo quantiles.
    return df3.bayeslogit.fit(TARGET, list(FEATURES), random_state=0)


def _frozen(df):
    """A deep copy (values and attrs) to compare the caller's frame against."""
    snap = df.copy(deep=True)
    snap.attrs = copy.deepcopy(df.attrs)
    return snap


def _assert_unchanged(df, snap):
    pd.testing.assert_frame_equal(df, snap)
    assert df.attrs == snap.attrs


def _binned_reference(p, hit, bins):
    """Reliability by pandas.cut: an independent implementation of the bins."""
    edges = np.linspace(0, 1, bins + 1)
    cat = pd.cut(p, edges, right=True, include_lowest=True)
    g = pd.DataFrame({"p": p, "hit": hit.astype(float), "bin": cat}).groupby("bin", observed=False)
    stats = g.agg(count=("p", "size"), pred=("p", "mean"), obs=("hit", "mean"))
    full = stats["count"] > 0
    ece = float((stats["count"][full] * (stats["obs"][full] - stats["pred"][full]).abs()).sum())
    return stats, ece / len(p)


# --------------------------------------------------------------- registration


def test_accessor_init_only_stores_the_frame(df2):
    a = df2.bayeslogit
    assert isinstance(a, acc.BayesLogitAccessor)
    assert list(vars(a)) == ["_df"] and a._df is df2


def test_model_names_resolve_lazily():
    assert isinstance(acc.make_model("laplace"), LaplaceLogisticClassifier)
    assert "laplace" in acc.available_models()
    with pytest.raises(ValueError, match="unknown model 'lasso'.*laplace, probit, tempered"):
        acc.make_model("lasso")


def test_missing_model_module_is_a_clear_import_error(monkeypatch):
    monkeypatch.setitem(acc.MODEL_NAMES, "ghost", ("skbayeslogit.no_such_model", "Ghost"))
    with pytest.raises(ImportError, match="'ghost'.*not available in this installation"):
        acc.make_model("ghost")
    assert "ghost" not in acc.available_models()


# ------------------------------------------------------------------------ fit


def test_fit_takes_every_usable_column_but_the_target_and_the_id(df2):
    # Issue 18: the text column orchard is encoded (it was left out without a
    # word); lot_id is an ID by its name, never a feature.
    m = df2.bayeslogit.fit(TARGET)
    assert isinstance(m, acc.FrameModel)
    assert isinstance(m.pipeline_[-1], StandardizedClassifier)
    assert list(m.feature_names_in_) == [*FEATURES, "orchard"]
    assert m.id_columns_ == ["lot_id"] and m.groups_["orchard"][0] == "orchard=Cedar Slope"
    assert m.target_name_ == TARGET
    assert list(m.classes_) == ["early_sale", "long_storage"]


def test_fit_includes_bool_columns_and_respects_features(df2):
    df = df2.assign(late=df2["days_since_bloom"] > 150)
    m = df.bayeslogit.fit(TARGET, standardize=False, prior_scale=1.0)
    assert "late" in m.feature_names_in_
    m = df.bayeslogit.fit(TARGET, ["bruise_share_pct", "firmness_n"], prior_scale=1.0)
    assert list(m.feature_names_in_) == ["bruise_share_pct", "firmness_n"]


def test_standardized_fit_equals_fit_on_standard_scaler_output(df2):
    from sklearn.preprocessing import StandardScaler

    m = df2.bayeslogit.fit(TARGET, list(FEATURES), prior_scale=0.7)
    X = df2[list(FEATURES)]
    Z = pd.DataFrame(StandardScaler().fit_transform(X), columns=list(FEATURES))
    ref = LaplaceLogisticClassifier(prior_scale=0.7).fit(Z, df2[TARGET])
    np.testing.assert_allclose(m.estimator_.coef_, ref.coef_, rtol=1e-9, atol=1e-12)
    table = m.coef_table(0.8)
    np.testing.assert_allclose(table["estimate"], ref.coef_table(0.8)["estimate"], rtol=1e-9)
    np.testing.assert_allclose(m.predict_proba(X), ref.predict_proba(Z), rtol=1e-9)


def test_both_scales_agree_with_a_maximum_likelihood_fit_on_raw_units(df2):
    # Without a prior the fit is invariant to rescaling the features, so the
    # original-scale half of the table must equal an unstandardised fit:
    # estimates, observed-information sd, bounds, sign probabilities.
    feats = list(FEATURES)
    std = df2.bayeslogit.fit(TARGET, feats, prior_scale=None).coef_table(0.9)
    raw = df2.bayeslogit.fit(TARGET, feats, prior_scale=None, standardize=False).coef_table(0.9)
    for col in ("estimate", "sd", "lower", "upper", "sign_prob"):
        np.testing.assert_allclose(std[f"{col}_original"], raw[col], rtol=1e-6, atol=1e-9)
    # Slopes: one sd of the feature times the per-unit slope.
    sd = df2[list(FEATURES)].std(ddof=0).to_numpy()
    np.testing.assert_allclose(
        std["estimate"].iloc[:-1], raw["estimate"].iloc[:-1] * sd, rtol=1e-6
    )


def test_fit_clones_an_estimator_instance(df2):
    est = LaplaceLogisticClassifier(prior_scale=2.0)
    m = df2.bayeslogit.fit(TARGET, model=est, standardize=False)
    assert not hasattr(est, "coef_")
    assert m is not est and m.prior_scale_ == 2.0


def test_fit_rejects_a_class_instead_of_an_instance(df2):
    with pytest.raises(TypeError, match=r"LaplaceLogisticClassifier\(\)"):
        df2.bayeslogit.fit(TARGET, model=LaplaceLogisticClassifier)


# -------------------------------------------------------------- bad input


def test_missing_column_lists_the_available_ones(df2, m2):
    with pytest.raises(KeyError, match="'grade'.*available columns: lot_id, orchard"):
        df2.bayeslogit.fit("grade")
    with pytest.raises(KeyError, match="'firmness_n'.*available columns"):
        df2.drop(columns="firmness_n").bayeslogit.predict_table(m2)


def test_text_features_are_encoded_not_refused(df2):
    # Issue 18: a text column is a categorical feature (one column per level),
    # no longer an error; a table with only an ID and a text column still fits.
    m = df2.bayeslogit.fit(TARGET, ["firmness_n", "orchard"], prior_scale=1.0)
    assert list(m.feature_names_out_) == ["firmness_n", *m.groups_["orchard"]]
    assert len(m.groups_["orchard"]) == df2["orchard"].nunique()
    only_text = df2[["lot_id", "orchard", TARGET]]
    assert list(only_text.bayeslogit.fit(TARGET).feature_names_in_) == ["orchard"]
    with pytest.raises(ValueError, match="no usable feature columns"):
        df2[["lot_id", TARGET]].bayeslogit.fit(TARGET)


def test_nan_rows_are_counted_per_column(df2):
    df = df2.copy()
    df.loc[[0, 1, 5], "firmness_n"] = np.nan
    df.loc[[1, 7], "bruise_share_pct"] = np.nan
    df[TARGET] = df[TARGET].where(df.index != 9)
    with pytest.raises(
        ValueError, match=r"5 of 400 rows.*firmness_n: 3, bruise_share_pct: 2, storage_grade: 1"
    ):
        df.bayeslogit.fit(TARGET)
    with pytest.warns(acc.DroppedRowsWarning, match=r"dropped 5 of 400 rows.*storage_grade: 1"):
        m = df.bayeslogit.fit(TARGET, dropna=True, prior_scale=1.0)
    with pytest.warns(acc.DroppedRowsWarning, match="dropped 5 of 400"):
        table = df.bayeslogit.confusion(TARGET, m, dropna=True)
    assert table.attrs["rows_dropped"] == 5 and table["n"].iloc[0] == 395


def test_nullable_float_na_is_a_missing_value(df2):
    df = df2.astype({"firmness_n": "Float64"})
    df.loc[3, "firmness_n"] = pd.NA
    with pytest.raises(ValueError, match="1 of 400 rows.*firmness_n: 1"):
        df.bayeslogit.fit(TARGET)


def test_one_class_target_is_a_clear_error(df2):
    df = df2[df2[TARGET] == "early_sale"]
    with pytest.raises(ValueError, match="only one class \\('early_sale'\\)"):
        df.bayeslogit.fit(TARGET)


def test_other_bad_arguments(df2, m2):
    with pytest.raises(ValueError, match="also listed among the features"):
        df2.bayeslogit.fit(TARGET, ["firmness_n", TARGET])
    with pytest.raises(TypeError, match="fitted model"):
        df2.bayeslogit.predict_table("laplace")
    with pytest.raises(ValueError, match="threshold"):
        df2.bayeslogit.confusion(TARGET, m2, threshold=1.5)
    with pytest.raises(ValueError, match="cost_fn must be a positive"):
        df2.bayeslogit.cost_threshold(TARGET, m2, 1.0, 0.0)
    bare = LaplaceLogisticClassifier(prior_scale=1.0).fit(
        df2[list(FEATURES)].to_numpy(), df2[TARGET]
    )
    with pytest.raises(TypeError, match="feature_names_in_"):
        df2.bayeslogit.predict_table(bare)
    other = df2.assign(**{TARGET: df2[TARGET].replace("early_sale", "discard")})
    with pytest.raises(ValueError, match="not fitted on: 'discard'"):
        other.bayeslogit.confusion(TARGET, m2)


# ------------------------------------------------------- caller's frame safety


def test_no_method_changes_the_callers_frame(df2, m2):
    df = df2.copy()
    snap = _frozen(df)
    df.bayeslogit.fit(TARGET)
    out = df.bayeslogit.predict_table(m2)
    out.iloc[0, 0] = "changed"
    df.bayeslogit.confusion(TARGET, m2)
    df.bayeslogit.calibration(TARGET, m2)
    df.bayeslogit.doubtful_labels(TARGET, model="laplace").attrs["scenario"] = "changed"
    df.bayeslogit.cost_threshold(TARGET, m2, 1.0, 2.0)
    df.bayeslogit.compare(TARGET, models=["laplace"], cv=3, random_state=0)
    _assert_unchanged(df, snap)


def test_read_only_arrays_and_str_dtype(df2):
    data = {}
    for col in FEATURES:
        arr = df2[col].to_numpy(dtype=np.float64).copy()
        arr.flags.writeable = False
        data[col] = arr
    df = pd.DataFrame(data, copy=False)
    df[TARGET] = pd.Series(df2[TARGET].to_numpy(dtype=object), dtype="str")
    assert pd.api.types.is_string_dtype(df[TARGET].dtype)
    snap = _frozen(df)
    m = df.bayeslogit.fit(TARGET)
    df.bayeslogit.predict_table(m)
    df.bayeslogit.calibration(TARGET, m)
    df.bayeslogit.compare(TARGET, models=["laplace"], cv=3, random_state=0)
    _assert_unchanged(df, snap)
    assert not data["firmness_n"].flags.writeable


def test_categorical_and_integer_targets(df2):
    cat = df2.astype({TARGET: "category"})
    m = cat.bayeslogit.fit(TARGET, prior_scale=1.0)
    assert list(m.classes_) == ["early_sale", "long_storage"]
    ints = df2.assign(**{TARGET: (df2[TARGET] == "long_storage").astype(int)})
    m = ints.bayeslogit.fit(TARGET, prior_scale=1.0)
    table = ints.bayeslogit.confusion(TARGET, m)
    assert table.index[0] == 1


# ---------------------------------------------------------------- predictions


def test_predict_table_binary(df2, m2):
    out = df2.bayeslogit.predict_table(m2, level=0.8)
    X = df2[list(FEATURES)]
    lo, hi = m2.predict_interval(X, level=0.8)
    np.testing.assert_allclose(out["prob_long_storage"], m2.predict_proba(X)[:, 1], rtol=RTOL)
    np.testing.assert_allclose(out["prob_long_storage_lower"], lo, rtol=RTOL)
    np.testing.assert_allclose(out["prob_long_storage_upper"], hi, rtol=RTOL)
    np.testing.assert_array_equal(out["predicted_label"], m2.predict(X))
    assert list(out.columns[: len(df2.columns)]) == list(df2.columns)
    assert out.attrs["level"] == 0.8 and out.attrs["scenario"] == "orchard_lots"


def test_predict_table_reads_model_columns_in_any_order(df2, m2):
    shuffled = df2[list(reversed(df2.columns))].assign(extra=1.0)
    a = df2.bayeslogit.predict_table(m2)
    b = shuffled.bayeslogit.predict_table(m2)
    np.testing.assert_allclose(a["prob_long_storage"], b["prob_long_storage"], rtol=RTOL)


def test_predict_table_multiclass(df3, m3):
    out = df3.bayeslogit.predict_table(m3)
    X = df3[list(FEATURES)]
    P = m3.predict_proba(X)
    lo, hi = m3.predict_interval(X, level=0.9)
    for k, c in enumerate(m3.classes_):
        np.testing.assert_allclose(out[f"prob_{c}"], P[:, k], rtol=RTOL)
        np.testing.assert_allclose(out[f"prob_{c}_lower"], lo[:, k], rtol=RTOL)
        np.testing.assert_allclose(out[f"prob_{c}_upper"], hi[:, k], rtol=RTOL)
    with pytest.raises(ValueError, match="already has column"):
        out.bayeslogit.predict_table(m3)


# ------------------------------------------------------------------ confusion


@pytest.mark.parametrize("threshold", [0.3, 0.5, 0.62])
def test_confusion_binary_matches_sklearn(df2, m2, threshold):
    table = df2.bayeslogit.confusion(TARGET, m2, threshold=threshold)
    p = m2.predict_proba(df2[list(FEATURES)])[:, 1]
    truth = (df2[TARGET] == "long_storage").to_numpy()
    called = p >= threshold
    tn, fp, fn, tp = confusion_matrix(truth, called, labels=[False, True]).ravel()
    row = table.loc["long_storage"]
    assert (row["tp"], row["fp"], row["fn"], row["tn"]) == (tp, fp, fn, tn)
    assert row["sensitivity"] == pytest.approx(recall_score(truth, called), rel=RTOL)
    assert row["specificity"] == pytest.approx(recall_score(~truth, ~called), rel=RTOL)
    assert row["precision"] == pytest.approx(precision_score(truth, called), rel=RTOL)
    assert row["accuracy"] == pytest.approx(accuracy_score(truth, called), rel=RTOL)


def test_confusion_multiclass_one_vs_rest_matches_sklearn(df3, m3):
    table = df3.bayeslogit.confusion(TARGET, m3, threshold=0.4)
    X = df3[list(FEATURES)]
    P = m3.predict_proba(X)
    y = df3[TARGET].to_numpy(dtype=object)
    assert list(table.index) == list(m3.classes_)
    for k, c in enumerate(m3.classes_):
        tn, fp, fn, tp = confusion_matrix(y == c, P[:, k] >= 0.4, labels=[False, True]).ravel()
        assert tuple(table.loc[c, ["tp", "fp", "fn", "tn"]]) == (tp, fp, fn, tn)
    assert table.attrs["accuracy"] == pytest.approx(accuracy_score(y, m3.predict(X)), rel=RTOL)


def test_confusion_fits_a_named_model_in_sample(df2):
    by_name = df2.bayeslogit.confusion(TARGET, "laplace")
    fitted = df2.bayeslogit.fit(TARGET)  # every usable column, as the named model
    pd.testing.assert_frame_equal(by_name, df2.bayeslogit.confusion(TARGET, fitted))


# ---------------------------------------------------------------- calibration


def test_calibration_binary_matches_sklearn(df2, m2):
    table = df2.bayeslogit.calibration(TARGET, m2, bins=8)
    p = m2.predict_proba(df2[list(FEATURES)])[:, 1]
    y = df2[TARGET].to_numpy(dtype=object)
    hit = y == "long_storage"
    prob_true, prob_pred = calibration_curve(y, p, n_bins=8, pos_label="long_storage")
    full = table[table["count"] > 0]
    np.testing.assert_allclose(full["observed_frequency"], prob_true, rtol=RTOL)
    np.testing.assert_allclose(full["mean_predicted"], prob_pred, rtol=RTOL)
    stats, ece = _binned_reference(p, hit, 8)
    np.testing.assert_array_equal(table["count"], stats["count"])
    assert table.attrs["ece"] == pytest.approx(ece, rel=1e-10)
    assert table.attrs["brier"] == pytest.approx(
        brier_score_loss(y, p, pos_label="long_storage"), rel=RTOL
    )
    P = m2.predict_proba(df2[list(FEATURES)])
    assert table.attrs["log_loss"] == pytest.approx(log_loss(y, P, labels=m2.classes_), rel=RTOL)


def test_calibration_multiclass_matches_sklearn(df3, m3):
    table = df3.bayeslogit.calibration(TARGET, m3)
    P = m3.predict_proba(df3[list(FEATURES)])
    y = df3[TARGET].to_numpy(dtype=object)
    eces = []
    for k, c in enumerate(m3.classes_):
        part = table[table["class"] == c]
        full = part[part["count"] > 0]
        prob_true, prob_pred = calibration_curve(y == c, P[:, k], n_bins=10)
        np.testing.assert_allclose(full["observed_frequency"], prob_true, rtol=RTOL)
        np.testing.assert_allclose(full["mean_predicted"], prob_pred, rtol=RTOL)
        eces.append(_binned_reference(P[:, k], y == c, 10)[1])
        assert table.attrs["ece_by_class"][c] == pytest.approx(eces[-1], rel=1e-10)
    assert table.attrs["ece"] == pytest.approx(np.mean(eces), rel=1e-10)
    assert table.attrs["brier"] == pytest.approx(
        brier_score_loss(y, P, labels=m3.classes_), rel=RTOL
    )
    assert table.attrs["log_loss"] == pytest.approx(log_loss(y, P, labels=m3.classes_), rel=RTOL)


# ------------------------------------------------------------ doubtful labels


def test_doubtful_labels_fall_back_to_laplace_with_a_warning(df2, monkeypatch):
    monkeypatch.setattr(acc, "available_models", lambda: ["laplace", "probit"])
    with pytest.warns(UserWarning, match="tempered model is not available"):
        out = df2.bayeslogit.doubtful_labels(TARGET, top=20)
    assert out.attrs["scorer"] == "-log P(recorded label)"
    assert len(out) == 20
    model = df2.bayeslogit.fit(TARGET)
    P = model.predict_proba(df2)  # the model reads its own columns (orchard encoded)
    codes = (df2[TARGET] == "long_storage").to_numpy().astype(int)
    score = -np.log(P[np.arange(len(P)), codes])
    expected = np.argsort(-score, kind="stable")[:20]
    np.testing.assert_array_equal(out.index, df2.index[expected])
    np.testing.assert_allclose(out["doubt_score"], score[expected], rtol=RTOL)
    np.testing.assert_allclose(out["prob_recorded_label"], np.exp(-score[expected]), rtol=1e-10)
    # The invented data record which labels were flipped: the top of the list
    # should be mostly those (15 % of rows are corrupted).
    truth = orchard_ground_truth(out)
    assert truth["label_corrupted"].sum() >= 15


def test_doubtful_labels_use_label_doubt_when_the_model_has_it(df2):
    class WithDoubt(LaplaceLogisticClassifier):
        def label_doubt(self, X, y):
            # Doubt = probability of the other label: a different ranking
            # scale from -log p, same order.
            P = self.predict_proba(X)
            return 1.0 - P[np.arange(len(P)), np.searchsorted(self.classes_, y)]

    model = df2.bayeslogit.fit(TARGET, model=WithDoubt(prior_scale=1.0))
    out = df2.bayeslogit.doubtful_labels(TARGET, model=model, top=None)
    assert out.attrs["scorer"] == "label_doubt" and len(out) == len(df2)
    np.testing.assert_allclose(out["doubt_score"], 1.0 - out["prob_recorded_label"], rtol=1e-12)
    assert out["doubt_score"].is_monotonic_decreasing


# ------------------------------------------------------------------ compare


def _ece_score(y_true, proba, *, labels):
    """ECE by pandas.cut: binary on the second class, multiclass class-wise."""
    y_true = np.asarray(y_true, dtype=object)
    if proba.ndim == 1:
        return _binned_reference(proba, y_true == labels[1], 10)[1]
    return float(
        np.mean([_binned_reference(proba[:, k], y_true == c, 10)[1] for k, c in enumerate(labels)])
    )


def test_compare_equals_cross_validate_on_the_same_folds(df2):
    # The reference below sees the numeric columns only.
    table = df2.bayeslogit.compare(
        TARGET, list(FEATURES), models=["laplace"], cv=4, random_state=11
    )
    X = df2[list(FEATURES)]
    y = df2[TARGET].to_numpy(dtype=object)
    labels = np.array(["early_sale", "long_storage"], dtype=object)
    scoring = {
        "accuracy": "accuracy",
        "neg_log_loss": "neg_log_loss",
        "neg_brier_score": make_scorer(
            brier_score_loss,
            response_method="predict_proba",
            greater_is_better=False,
            pos_label="long_storage",
        ),
        "ece": make_scorer(_ece_score, response_method="predict_proba", labels=labels),
    }
    cvres = cross_validate(
        StandardizedClassifier(LaplaceLogisticClassifier()),
        X,
        y,
        cv=StratifiedKFold(4, shuffle=True, random_state=11),
        scoring=scoring,
    )
    row = table.loc["laplace"]
    assert row["accuracy"] == pytest.approx(cvres["test_accuracy"].mean(), rel=RTOL)
    assert row["log_loss"] == pytest.approx(-cvres["test_neg_log_loss"].mean(), rel=1e-10)
    assert row["brier"] == pytest.approx(-cvres["test_neg_brier_score"].mean(), rel=1e-10)
    assert row["ece"] == pytest.approx(cvres["test_ece"].mean(), rel=1e-10)
    assert row["accuracy_sd"] == pytest.approx(cvres["test_accuracy"].std(ddof=1), rel=1e-10)
    assert 0 < row["fit_time"] < 10


def test_compare_multiclass_skips_binary_only_probit(df3):
    pytest.importorskip("skbayeslogit.probit")
    with pytest.warns(UserWarning, match="'probit' is binary-only"):
        table = df3.bayeslogit.compare(
            TARGET, list(FEATURES), models=["laplace", "probit"], cv=3, random_state=0
        )
    assert list(table.index) == ["laplace"]
    X = df3[list(FEATURES)]
    y = df3[TARGET].to_numpy(dtype=object)
    cvres = cross_validate(
        StandardizedClassifier(LaplaceLogisticClassifier()),
        X,
        y,
        cv=StratifiedKFold(3, shuffle=True, random_state=0),
        scoring={"neg_log_loss": "neg_log_loss", "accuracy": "accuracy"},
    )
    assert table.loc["laplace", "log_loss"] == pytest.approx(
        -cvres["test_neg_log_loss"].mean(), rel=1e-10
    )
    assert table.loc["laplace", "accuracy"] == pytest.approx(
        cvres["test_accuracy"].mean(), rel=RTOL
    )


def test_compare_accepts_a_mapping_and_uses_one_set_of_folds(df2):
    models = {"tight": LaplaceLogisticClassifier(prior_scale=0.05), "auto": "laplace"}
    table = df2.bayeslogit.compare(TARGET, models=models, cv=3, random_state=5)
    alone = df2.bayeslogit.compare(TARGET, models=["laplace"], cv=3, random_state=5)
    assert list(table.index) == ["tight", "auto"]
    cols = ["accuracy", "log_loss", "brier", "ece"]
    single = df2.bayeslogit.compare(TARGET, models="laplace", cv=3, random_state=5)
    pd.testing.assert_frame_equal(single[cols], alone[cols])
    pd.testing.assert_series_equal(
        table.loc["auto", cols], alone.loc["laplace", cols], check_names=False
    )


def test_compare_rejects_too_few_rows_per_class(df2):
    small = pd.concat([df2[df2[TARGET] == "early_sale"], df2[df2[TARGET] == "long_storage"][:3]])
    with pytest.raises(ValueError, match="'long_storage' \\(3\\).*fewer folds"):
        small.bayeslogit.compare(TARGET, models=["laplace"], cv=5)


# ------------------------------------------------------------- cost threshold


def test_cost_threshold_rules(df2, m2):
    table = df2.bayeslogit.cost_threshold(TARGET, m2, cost_fp=1.0, cost_fn=3.0)
    p = m2.predict_proba(df2[list(FEATURES)])[:, 1]
    truth = (df2[TARGET] == "long_storage").to_numpy()

    def cost_at(t):
        tn, fp, fn, tp = confusion_matrix(truth, p >= t, labels=[False, True]).ravel()
        return 1.0 * fp + 3.0 * fn, tp / (tp + fn), tn / (tn + fp)

    bayes = table.loc["decision_theoretic"]
    assert bayes["threshold"] == pytest.approx(0.25, rel=RTOL)
    cost, sens, spec = cost_at(bayes["threshold"])
    assert (bayes["cost"], bayes["sensitivity"], bayes["specificity"]) == pytest.approx(
        (cost, sens, spec), rel=RTOL
    )
    emp = table.loc["empirical"]
    cost, sens, spec = cost_at(emp["threshold"])
    assert (emp["cost"], emp["sensitivity"], emp["specificity"]) == pytest.approx(
        (cost, sens, spec), rel=RTOL
    )
    # Brute force over every distinct cut (each predicted probability, and
    # one above them all): nothing is cheaper than the reported minimiser.
    cuts = np.concatenate([np.unique(p), [1.1]])
    called = p[None, :] >= cuts[:, None]
    brute = np.min(1.0 * (called & ~truth).sum(axis=1) + 3.0 * (~called & truth).sum(axis=1))
    assert emp["cost"] == brute
    assert emp["cost"] <= bayes["cost"]
    assert emp["cost_per_row"] == pytest.approx(emp["cost"] / len(p), rel=RTOL)


def test_cost_threshold_needs_a_binary_target(df3, m3):
    with pytest.raises(ValueError, match="binary target"):
        df3.bayeslogit.cost_threshold(TARGET, m3, 1.0, 1.0)


# -------------------------------------------------- models by name, if present


def test_probit_by_name():
    pytest.importorskip("skbayeslogit.probit")
    from skbayeslogit.probit import ProbitClassifier

    df = make_orchard_lots(300, random_state=8)
    m = df.bayeslogit.fit(TARGET, model="probit")
    assert isinstance(m.estimator_, ProbitClassifier)
    out = df.bayeslogit.predict_table(m)
    lo, hi = m.predict_interval(df)
    np.testing.assert_allclose(out["prob_long_storage_lower"], lo, rtol=RTOL)
    table = df.bayeslogit.compare(TARGET, models=["laplace", "probit"], cv=3, random_state=1)
    assert list(table.index) == ["laplace", "probit"]


def test_tempered_by_name_and_as_the_default_doubt_model():
    pytest.importorskip("skbayeslogit.tempered")
    from skbayeslogit.tempered import TemperedLogisticClassifier

    df = make_orchard_lots(300, random_state=8)
    m = df.bayeslogit.fit(TARGET, model="tempered")
    assert isinstance(m.estimator_, TemperedLogisticClassifier)
    out = df.bayeslogit.predict_table(m)
    np.testing.assert_allclose(out["prob_long_storage"], m.predict_proba(df)[:, 1], rtol=RTOL)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        doubt = df.bayeslogit.doubtful_labels(TARGET)
    assert not [w for w in caught if "not available" in str(w.message)]
    expected = "label_doubt" if hasattr(m, "label_doubt") else "-log P(recorded label)"
    assert doubt.attrs["scorer"] == expected
    assert doubt["doubt_score"].is_monotonic_decreasing
    assert orchard_ground_truth(doubt)["label_corrupted"].sum() >= 12
