"""Tests of the invented orchard demo data and its recorded ground truth."""

import json
import pickle

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression

from skbayeslogit.datasets import (
    FEATURES,
    make_orchard_lots,
    orchard_arrays,
    orchard_ground_truth,
    orchard_true_coefficients,
)

CLASSES = {
    2: ["early_sale", "long_storage"],
    3: ["fresh_market", "juice", "long_storage"],
}
COLUMNS = ["lot_id", "orchard", *FEATURES, "storage_grade"]
RANGES = {
    "firmness_n": (50, 90),
    "soluble_solids_brix": (10, 16),
    "starch_index": (1, 8),
    "days_since_bloom": (120, 170),
    "fruit_mass_g": (120, 260),
    "bruise_share_pct": (0, 15),
    "intake_temp_c": (2, 28),
}


def _standardised(df):
    center = np.array([df.attrs["feature_center"][f] for f in FEATURES])
    scale = np.array([df.attrs["feature_scale"][f] for f in FEATURES])
    return (df[list(FEATURES)].to_numpy(dtype=float) - center) / scale


# ---------------------------------------------------------------- determinism


@pytest.mark.parametrize("n_classes", [2, 3])
def test_same_seed_gives_identical_frame(n_classes):
    a = make_orchard_lots(300, n_classes=n_classes, random_state=7)
    b = make_orchard_lots(300, n_classes=n_classes, random_state=7)
    pd.testing.assert_frame_equal(a, b)
    assert a.attrs == b.attrs


def test_different_seeds_differ():
    a = make_orchard_lots(300, random_state=1)
    b = make_orchard_lots(300, random_state=2)
    assert not a[list(FEATURES)].equals(b[list(FEATURES)])
    assert a.attrs["corrupted"]["lot_id"] != b.attrs["corrupted"]["lot_id"]


def test_generator_seed_matches_int_seed():
    a = make_orchard_lots(100, random_state=5)
    b = make_orchard_lots(100, random_state=np.random.default_rng(5))
    pd.testing.assert_frame_equal(a, b)
    assert b.attrs["params"]["random_state"] is None
    assert a.attrs["params"]["random_state"] == 5


# ------------------------------------------------------ shapes, dtypes, ranges


@pytest.mark.parametrize("n_classes", [2, 3])
def test_columns_dtypes_and_ranges(n_classes):
    df = make_orchard_lots(n_classes=n_classes)
    assert df.shape == (400, 10)
    assert list(df.columns) == COLUMNS
    for col in ("lot_id", "orchard", "storage_grade"):
        assert pd.api.types.is_string_dtype(df[col])
    for col in ("starch_index", "days_since_bloom", "fruit_mass_g"):
        assert df[col].dtype == np.int64
    for col in ("firmness_n", "soluble_solids_brix", "bruise_share_pct", "intake_temp_c"):
        assert df[col].dtype == np.float64
    for col, (lo, hi) in RANGES.items():
        assert df[col].between(lo, hi).all(), col
    assert df["lot_id"].is_unique
    assert df["lot_id"].iloc[0] == "L0001" and df["lot_id"].iloc[-1] == "L0400"
    assert df["orchard"].nunique() == 5
    assert set(df["storage_grade"]) == set(CLASSES[n_classes])
    assert df.attrs["classes"] == CLASSES[n_classes]
    assert not df.isna().any().any()


def test_lot_id_widens_with_n():
    df = make_orchard_lots(12_345, random_state=0)
    assert df["lot_id"].iloc[-1] == "L12345" and df["lot_id"].is_unique


def test_measurements_correlate_like_ripening():
    df = make_orchard_lots(20_000, flip_far=0, flip_near=0)
    r = df[list(FEATURES)].corr()
    assert r.loc["starch_index", "days_since_bloom"] > 0.5
    assert r.loc["firmness_n", "days_since_bloom"] < -0.4
    assert r.loc["soluble_solids_brix", "starch_index"] > 0.3
    # The noise column is independent of everything (|r| < 4 / sqrt(n)).
    others = r.loc["intake_temp_c"].drop("intake_temp_c")
    assert (others.abs() < 4 / np.sqrt(len(df))).all()


@pytest.mark.parametrize("n_classes", [2, 3])
def test_classes_roughly_balanced(n_classes):
    gt = orchard_ground_truth(make_orchard_lots(20_000, n_classes=n_classes))
    share = gt["clean_label"].value_counts(normalize=True)
    assert ((share > 0.8 / n_classes) & (share < 1.2 / n_classes)).all()


def test_truth_not_in_numeric_columns():
    # A naive "every numeric column but the target" fit must see exactly the
    # measurements, nothing that encodes the truth.
    df = make_orchard_lots()
    assert list(df.select_dtypes("number").columns) == list(FEATURES)
    assert df.select_dtypes("bool").empty


def test_attrs_are_json_and_pickle_friendly():
    df = make_orchard_lots(n_classes=3)
    assert json.loads(json.dumps(df.attrs)) == df.attrs
    again = pickle.loads(pickle.dumps(df))
    assert again.attrs == df.attrs


def test_integral_float_n_lots_is_accepted():
    assert len(make_orchard_lots(1e3)) == 1000


# ---------------------------------------------------------------- corruption


@pytest.mark.parametrize(
    ("n", "far", "near"),
    [(400, 0.10, 0.05), (333, 0.07, 0.13), (10, 0.0, 0.0), (1000, 0.0, 0.2), (25, 0.5, 0.7)],
)
@pytest.mark.parametrize("n_classes", [2, 3])
def test_exact_corruption_counts(n, far, near, n_classes):
    # A share is of its half: the n // 2 rows farthest from the boundary, and
    # the rest (module docstring).
    df = make_orchard_lots(n, n_classes=n_classes, flip_far=far, flip_near=near)
    gt = orchard_ground_truth(df)
    k_far, k_near = round(far * (n // 2)), round(near * (n - n // 2))
    assert df.attrs["n_corrupted"] == {"far": k_far, "near": k_near}
    counts = gt["corruption"].value_counts()
    assert counts.get("far", 0) == k_far
    assert counts.get("near", 0) == k_near
    assert gt["label_corrupted"].sum() == k_far + k_near
    corrupted = gt["label_corrupted"].to_numpy()
    same = (gt["observed_label"] == gt["clean_label"]).to_numpy()
    assert not same[corrupted].any()
    assert same[~corrupted].all()


def test_three_class_flips_reach_both_other_classes():
    gt = orchard_ground_truth(make_orchard_lots(4000, n_classes=3, flip_far=0.2))
    flipped = gt[gt["label_corrupted"]]
    pairs = flipped.groupby(["clean_label", "observed_label"]).size()
    # Every clean class sends flips to both other classes: 6 ordered pairs.
    assert len(pairs) == 6


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("n_classes", [2, 3])
def test_far_flips_are_far_and_near_flips_near(seed, n_classes):
    df = make_orchard_lots(n_classes=n_classes, random_state=seed)
    gt = orchard_ground_truth(df)
    far = gt[gt["corruption"] == "far"]
    near = gt[gt["corruption"] == "near"]
    assert far["boundary_gap"].min() > near["boundary_gap"].max()
    # Far flips overturn labels the truth favoured: the clean label was the
    # truth's most probable class, and the row lies in the far half.
    assert (far["clean_margin"] > 0).all()
    assert (far["true_prob_clean"] > (0.5 if n_classes == 2 else 1 / 3)).all()
    median_gap = gt["boundary_gap"].median()
    assert (far["boundary_gap"] >= median_gap).all()
    assert (near["boundary_gap"] <= median_gap).all()
    # Within its half, a flipped label stays a minority.
    assert len(far) <= 0.5 * (len(gt) // 2)
    if n_classes == 2:
        assert far["true_logit"].abs().min() > near["true_logit"].abs().max()


def test_no_flips_means_observed_equals_clean():
    gt = orchard_ground_truth(make_orchard_lots(500, flip_far=0, flip_near=0))
    assert not gt["label_corrupted"].any()
    assert (gt["observed_label"] == gt["clean_label"]).all()
    assert (gt["corruption"] == "none").all()


# ------------------------------------------------------------- ground truth


def test_ground_truth_survives_row_subset_and_reordering():
    df = make_orchard_lots(n_classes=3)
    full = orchard_ground_truth(df)
    part = orchard_ground_truth(df.iloc[::-3])
    pd.testing.assert_frame_equal(part, full.iloc[::-3])


def test_ground_truth_frame_columns():
    gt = orchard_ground_truth(make_orchard_lots())
    assert list(gt.columns) == [
        "lot_id",
        "observed_label",
        "clean_label",
        "label_corrupted",
        "corruption",
        "true_prob_early_sale",
        "true_prob_long_storage",
        "true_prob_clean",
        "clean_margin",
        "boundary_gap",
        "true_logit",
    ]
    assert gt["label_corrupted"].dtype == bool
    np.testing.assert_allclose(gt["true_prob_early_sale"] + gt["true_prob_long_storage"], 1)
    np.testing.assert_allclose(gt["true_prob_long_storage"], 1 / (1 + np.exp(-gt["true_logit"])))


def test_helpers_reject_frames_without_truth():
    df = make_orchard_lots()
    bare = pd.DataFrame(df.to_dict("list"))
    with pytest.raises(ValueError, match="attrs"):
        orchard_ground_truth(bare)
    with pytest.raises(ValueError, match="attrs"):
        orchard_true_coefficients(bare)


@pytest.mark.parametrize("n_classes", [2, 3])
def test_original_and_standardised_coefficients_agree(n_classes):
    df = make_orchard_lots(n_classes=n_classes)
    coef = orchard_true_coefficients(df)
    X = df[list(FEATURES)].to_numpy(dtype=float)
    Z = _standardised(df)
    for _, table in coef.groupby("class"):
        t = table.set_index("parameter")
        eta_orig = t.loc["intercept", "original"] + X @ t.loc[list(FEATURES), "original"]
        eta_std = t.loc["intercept", "standardised"] + Z @ t.loc[list(FEATURES), "standardised"]
        np.testing.assert_allclose(eta_orig, eta_std, rtol=1e-10, atol=1e-10)
    assert (coef.query("parameter == 'intake_temp_c'")["standardised"] == 0).all()
    if n_classes == 2:
        assert list(coef["class"].unique()) == ["long_storage"]
        assert len(coef) == 8
    else:
        assert len(coef) == 24
        assert (coef.loc[coef["class"] == "juice", ["standardised", "original"]] == 0).all().all()


@pytest.mark.parametrize("n_classes", [2, 3])
def test_clean_labels_follow_true_probabilities(n_classes):
    # Given the features, the count of clean labels in a class is a sum of
    # independent Bernoulli(p_i): its sd is sqrt(sum p_i (1 - p_i)). We accept
    # 4 sd, overall and within each decile of the true probability.
    gt = orchard_ground_truth(
        make_orchard_lots(20_000, n_classes=n_classes, flip_far=0, flip_near=0, random_state=3)
    )
    for cls in CLASSES[n_classes]:
        p = gt[f"true_prob_{cls}"].to_numpy()
        hit = (gt["clean_label"] == cls).to_numpy()
        assert abs(hit.sum() - p.sum()) <= 4 * np.sqrt(np.sum(p * (1 - p)))
        bins = np.quantile(p, np.linspace(0, 1, 11))
        which = np.clip(np.searchsorted(bins, p, side="right") - 1, 0, 9)
        for b in range(10):
            pb, hb = p[which == b], hit[which == b]
            assert abs(hb.sum() - pb.sum()) <= 4 * np.sqrt(np.sum(pb * (1 - pb))), (cls, b)


# --------------------------------------------- recovery by a reference fit


def _fisher_binary(Z1, p):
    return (Z1 * (p * (1 - p))[:, None]).T @ Z1


def test_maximum_likelihood_recovers_binary_truth():
    # scikit-learn's LogisticRegression with C = 1e6 is maximum likelihood to
    # within ~1e-6 here. Tolerance: 5 standard errors from the inverse Fisher
    # information at the fit (each of 8 parameters; false alarm ~5e-6).
    df = make_orchard_lots(50_000, flip_far=0, flip_near=0, random_state=11)
    Z = _standardised(df)
    y = (df["storage_grade"] == "long_storage").to_numpy()
    fit = LogisticRegression(C=1e6, tol=1e-10, max_iter=1000).fit(Z, y)
    est = np.r_[fit.intercept_, fit.coef_[0]]
    truth = orchard_true_coefficients(df).set_index("parameter")["standardised"]
    true = truth.loc[["intercept", *FEATURES]].to_numpy()
    Z1 = np.column_stack([np.ones(len(Z)), Z])
    se = np.sqrt(np.diag(np.linalg.inv(_fisher_binary(Z1, fit.predict_proba(Z)[:, 1]))))
    assert np.all(se < 0.05)  # informative enough to make the check sharp
    np.testing.assert_array_less(np.abs(est - true), 5 * se)


def test_maximum_likelihood_recovers_three_class_truth():
    # Softmax coefficients are identified only as differences from a
    # reference class ("juice"). Same 5-SE tolerance, from the Fisher
    # information of the reference parametrisation (16 parameters).
    df = make_orchard_lots(50_000, n_classes=3, flip_far=0, flip_near=0, random_state=12)
    Z = _standardised(df)
    fit = LogisticRegression(C=1e6, tol=1e-10, max_iter=2000).fit(Z, df["storage_grade"])
    assert list(fit.classes_) == CLASSES[3]
    ref = list(fit.classes_).index("juice")
    others = [k for k in range(3) if k != ref]
    theta = np.column_stack([fit.intercept_, fit.coef_])
    est = np.concatenate([theta[k] - theta[ref] for k in others])

    coef = orchard_true_coefficients(df).set_index(["class", "parameter"])["standardised"]
    true = np.concatenate(
        [coef.loc[fit.classes_[k]].loc[["intercept", *FEATURES]].to_numpy() for k in others]
    )

    Z1 = np.column_stack([np.ones(len(Z)), Z])
    P = fit.predict_proba(Z)
    d = Z1.shape[1]
    info = np.empty((2 * d, 2 * d))
    for a, k in enumerate(others):
        for b, m in enumerate(others):
            w = P[:, k] * ((k == m) - P[:, m])
            info[a * d : (a + 1) * d, b * d : (b + 1) * d] = (Z1 * w[:, None]).T @ Z1
    se = np.sqrt(np.diag(np.linalg.inv(info)))
    assert np.all(se < 0.08)
    np.testing.assert_array_less(np.abs(est - true), 5 * se)


# --------------------------------------------------------------- arrays


@pytest.mark.parametrize("n_classes", [2, 3])
def test_arrays_match_frame(n_classes):
    df = make_orchard_lots(500, n_classes=n_classes, random_state=4)
    X, y = orchard_arrays(500, n_classes=n_classes, standardise=False, random_state=4)
    Xs, ys = orchard_arrays(500, n_classes=n_classes, random_state=4)
    np.testing.assert_array_equal(X, df[list(FEATURES)].to_numpy(dtype=float))
    np.testing.assert_allclose(Xs, _standardised(df), rtol=1e-12, atol=1e-12)
    codes = pd.Categorical(df["storage_grade"], categories=CLASSES[n_classes]).codes
    np.testing.assert_array_equal(y, codes)
    np.testing.assert_array_equal(ys, y)


def test_arrays_extra_noise_columns():
    X0, y0 = orchard_arrays(2000, random_state=9)
    X, y = orchard_arrays(2000, d_extra=13, random_state=9)
    assert X.shape == (2000, 20) and X.dtype == np.float64 and X.flags.c_contiguous
    assert y.dtype == np.int64 and set(np.unique(y)) == {0, 1}
    np.testing.assert_array_equal(X[:, :7], X0)
    np.testing.assert_array_equal(y, y0)
    extra = X[:, 7:]
    assert np.all(np.abs(extra.mean(axis=0)) < 4 / np.sqrt(2000))
    assert np.all(np.abs(extra.std(axis=0) - 1) < 0.1)


def test_arrays_three_classes():
    X, y = orchard_arrays(1000, n_classes=3, d_extra=3)
    assert X.shape == (1000, 10)
    assert set(np.unique(y)) == {0, 1, 2}


# --------------------------------------------------------------- validation


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"n_lots": 9}, "n_lots"),
        ({"n_lots": 10.5}, "n_lots"),
        ({"n_lots": -5}, "n_lots"),
        ({"n_classes": 4}, "n_classes"),
        ({"n_classes": 1}, "n_classes"),
        ({"flip_far": -0.1}, "flip_far"),
        ({"flip_far": 1.0}, "flip_far"),
        ({"flip_near": 1.5}, "flip_near"),
        ({"flip_near": float("nan")}, "flip_near"),
        ({"random_state": -1}, "random_state"),
    ],
)
def test_bad_parameters_raise_value_error(kwargs, match):
    with pytest.raises(ValueError, match=match):
        make_orchard_lots(**kwargs)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"n_lots": "400"}, "n_lots"),
        ({"n_lots": True}, "n_lots"),
        ({"flip_far": "0.1"}, "flip_far"),
        ({"random_state": "seed"}, "random_state"),
    ],
)
def test_wrong_types_raise_type_error(kwargs, match):
    with pytest.raises(TypeError, match=match):
        make_orchard_lots(**kwargs)


def test_arrays_validate_d_extra():
    with pytest.raises(ValueError, match="d_extra"):
        orchard_arrays(100, d_extra=-1)
    with pytest.raises(TypeError, match="d_extra"):
        orchard_arrays(100, d_extra=2.5)
    with pytest.raises(ValueError, match="n_lots"):
        orchard_arrays(5)
