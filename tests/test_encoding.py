"""The encoder built from column roles, checked against outside references.

References: statsmodels' formula ``logit`` with ``C(..., Treatment(reference=...))``
(the maximum-likelihood fit with treatment coding, and its observed-information
standard errors); scikit-learn's ``LogisticRegression`` (the penalised fit);
statsmodels' ``GLM`` with ``freq_weights`` (frequency weights); pandas'
``get_dummies``, ``isna`` and ``median`` (the one-hot design and the counts).
Data: statsmodels' ``fair`` data set (Fair, "A Theory of Extramarital
Affairs", Journal of Political Economy 86, 1978), shipped in statsmodels.
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from sklearn.linear_model import LogisticRegression

from skbayeslogit import LaplaceLogisticClassifier
from skbayeslogit._frame.encoding import count_unseen, encode_frame, make_encoder
from skbayeslogit._frame.errors import FrameInputError
from skbayeslogit._frame.roles import assign_roles


@pytest.fixture(scope="module")
def fair():
    """The fair data with two text categorical columns and a binary text target."""
    d = sm.datasets.fair.load_pandas().data
    return pd.DataFrame(
        {
            "age": d["age"],
            "yrs_married": d["yrs_married"],
            "children": d["children"],
            "occupation": "occ" + d["occupation"].astype(int).astype(str),
            "rating": "r" + d["rate_marriage"].astype(int).astype(str),
            "affair": np.where(d["affairs"] > 0, "yes", "no"),
        }
    )


def _formula_fit(df, ref_occ, ref_rating):
    formula = (
        "y ~ age + yrs_married + children"
        f" + C(occupation, Treatment(reference='{ref_occ}'))"
        f" + C(rating, Treatment(reference='{ref_rating}'))"
    )
    data = df.assign(y=(df["affair"] == "yes").astype(float))
    return smf.logit(formula, data).fit(method="newton", tol=1e-12, maxiter=100, disp=0)


def _renamed(params):
    """statsmodels' names ('C(occupation, ...)[T.occ2]') as ours ('occupation=occ2')."""
    out = {}
    for name, value in params.items():
        if name == "Intercept":
            out["intercept"] = value
        elif name.startswith("C("):
            col = name[2:].split(",")[0]
            out[f"{col}={name.split('[T.')[1].rstrip(']')}"] = value
        else:
            out[name] = value
    return pd.Series(out)


def test_no_prior_equals_statsmodels_treatment_coding(fair):
    roles = assign_roles(fair, "affair", positive="yes")
    design = encode_frame(fair, roles, prior_scale=None)
    # The reference is the most frequent level, counted here by pandas.
    ref_occ = fair["occupation"].value_counts().idxmax()
    ref_rating = fair["rating"].value_counts().idxmax()
    assert design.reference_levels == {"occupation": ref_occ, "rating": ref_rating}
    assert f"occupation={ref_occ}" not in design.X.columns
    model = LaplaceLogisticClassifier(prior_scale=None, tol=1e-14).fit(design.X, design.y)
    ours = model.coef_table()
    ref = _formula_fit(fair, ref_occ, ref_rating)
    est, se = _renamed(ref.params), _renamed(ref.bse)
    assert sorted(est.index) == sorted(ours.index)
    # Both are Newton's fixed point of the same likelihood; 1e-8 leaves room
    # for the conditioning of the observed information (near 1e4 here).
    np.testing.assert_allclose(ours.loc[est.index, "estimate"], est, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(ours.loc[se.index, "sd"], se, rtol=1e-8)


def test_prior_equals_sklearn_on_the_same_one_hot_design(fair):
    # Our objective: sum of losses + ||w||^2 / (2 s^2), flat intercept.
    # scikit-learn's: C * sum of losses + ||w||^2 / 2, intercept unpenalised;
    # dividing by C gives ours with s^2 = C, so C = s**2.
    s = 0.5
    roles = assign_roles(fair, "affair", positive="yes")
    design = encode_frame(fair, roles, prior_scale=s)
    levels = set(fair["occupation"]) | set(fair["rating"])
    assert {c.split("=")[1] for c in design.X.columns if "=" in c} == levels
    ours = LaplaceLogisticClassifier(prior_scale=s, tol=1e-14).fit(design.X, design.y)
    ref = LogisticRegression(C=s**2, solver="newton-cholesky", tol=1e-12, max_iter=1000)
    ref.fit(design.X.to_numpy(), design.y)
    # scikit-learn stops on the gradient's max-norm (tol=1e-12): the two
    # minimisers then agree to far better than 1e-8.
    np.testing.assert_allclose(ours.coef_, ref.coef_, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(ours.intercept_, ref.intercept_, rtol=1e-8, atol=1e-10)


def test_one_hot_columns_equal_pandas_get_dummies(fair):
    roles = assign_roles(fair, "affair")
    design = encode_frame(fair, roles, prior_scale=1.0)
    ref = pd.get_dummies(fair[["occupation", "rating"]], prefix_sep="=", dtype=float)
    np.testing.assert_array_equal(design.X[ref.columns].to_numpy(), ref.to_numpy())
    assert design.groups["age"] == ["age"]
    assert design.groups["occupation"] == [c for c in ref.columns if c.startswith("occupation=")]
    assert sum(map(len, design.groups.values())) == design.X.shape[1]


def test_rare_levels_pooled_and_grouped(fair):
    roles = assign_roles(fair, "affair")
    design = encode_frame(fair, roles, prior_scale=1.0, min_frequency=200)
    counts = fair["occupation"].value_counts()  # pandas counts decide what is rare
    rare = sorted(counts[counts < 200].index)
    assert rare, "the fair data has occupations with fewer than 200 rows"
    group = design.groups["occupation"]
    assert "occupation=(rare levels)" in group
    assert len(group) == len(counts) - len(rare) + 1
    pooled = fair["occupation"].isin(rare).to_numpy(dtype=float)
    np.testing.assert_array_equal(design.X["occupation=(rare levels)"].to_numpy(), pooled)


def _with_gaps(df):
    out = df.copy()
    out.loc[[1, 5, 9], "age"] = np.nan
    out.loc[[5, 20], "occupation"] = np.nan
    out.loc[[30], "affair"] = np.nan
    return out


def test_missing_error_names_columns_and_counts(fair):
    gappy = _with_gaps(fair)
    roles = assign_roles(gappy, "affair")
    with pytest.raises(FrameInputError, match=r"age: 3, occupation: 2, affair \(target\): 1"):
        encode_frame(gappy, roles)


def test_missing_drop_counts_rows(fair):
    gappy = _with_gaps(fair)
    before = gappy.copy()
    design = encode_frame(gappy, assign_roles(gappy, "affair"), missing="drop")
    # rows 1, 5, 9, 20, 30 (pandas: rows with any missing cell among the used columns)
    expected = int(gappy[["age", "occupation", "affair"]].isna().any(axis=1).sum())
    assert design.dropped_rows == expected == 5
    assert len(design.X) == len(gappy) - 5 and not design.rows[[1, 5, 9, 20, 30]].any()
    pd.testing.assert_frame_equal(gappy, before)


def test_missing_impute_inside_the_encoder(fair):
    gappy = _with_gaps(fair)
    design = encode_frame(gappy, assign_roles(gappy, "affair"), missing="impute")
    assert design.imputed == {"age": 3, "occupation": 2}
    assert design.dropped_rows == 1  # the row without a target
    used = gappy[gappy["affair"].notna()]
    median = used["age"].median()  # pandas' median of the fitted rows
    assert np.all(design.X.loc[[1, 5, 9], "age"] == median)
    mode = used["occupation"].value_counts().idxmax()
    assert design.X.loc[20, f"occupation={mode}"] == 1.0


def test_unseen_levels_counted_at_scoring(fair):
    design = encode_frame(fair, assign_roles(fair, "affair"), prior_scale=1.0)
    new = fair.head(6).copy()
    new.loc[[0, 1], "occupation"] = "astronaut"
    new.loc[2, "rating"] = np.nan
    X, unseen = design.transform(new)
    assert unseen == {"occupation": 2}
    group = design.groups["occupation"]
    assert np.all(X.loc[[0, 1], group].to_numpy() == 0.0)
    assert count_unseen(design.encoder, fair) == {}


def test_frequency_weights_equal_statsmodels_glm(fair):
    grouped = fair.groupby(["occupation", "rating", "affair"]).size().rename("n").reset_index()
    roles = assign_roles(grouped, "affair", weight="n", positive="yes")
    design = encode_frame(grouped, roles, prior_scale=None)
    assert roles.table.set_index("column").loc["n", "role"] == "weight"
    model = LaplaceLogisticClassifier(prior_scale=None, tol=1e-14)
    model.fit(design.X, design.y, sample_weight=design.sample_weight)
    exog = sm.add_constant(design.X, prepend=False)
    ref = sm.GLM(design.y, exog, family=sm.families.Binomial(), freq_weights=design.sample_weight)
    res = ref.fit(method="newton", tol=1e-13, maxiter=100)
    ours = model.coef_table()
    np.testing.assert_allclose(ours["estimate"].to_numpy(), res.params.to_numpy(), rtol=1e-8)
    np.testing.assert_allclose(ours["sd"].to_numpy(), res.bse.to_numpy(), rtol=1e-8)


def test_bad_policy_is_one_line():
    with pytest.raises(FrameInputError, match="missing must be one of") as info:
        make_encoder(["a"], [], missing="fill")
    assert "\n" not in str(info.value)


def test_categorical_encoder_survives_clone_and_pickle(fair):
    import pickle

    from sklearn.base import clone

    from skbayeslogit._frame.levels import CategoricalEncoder, LevelCodes

    cols = ["occupation", "rating"]
    enc = CategoricalEncoder(reference={"occupation": "occ3", "rating": "r5"}).fit(fair[cols])
    again = clone(enc).fit(fair[cols])
    loaded = pickle.loads(pickle.dumps(enc))
    np.testing.assert_array_equal(again.transform(fair[cols]), enc.transform(fair[cols]))
    np.testing.assert_array_equal(loaded.transform(fair[cols]), enc.transform(fair[cols]))
    assert list(loaded.get_feature_names_out()) == list(enc.get_feature_names_out())
    assert "occupation=occ3" not in enc.get_feature_names_out()
    # The codes are the positions among the sorted levels: pandas' Categorical
    # with sorted categories gives the same numbers.
    codes = LevelCodes().fit(fair[cols]).transform(fair[cols])
    ref = pd.Categorical(fair["occupation"], categories=sorted(fair["occupation"].unique()))
    np.testing.assert_array_equal(codes[:, 0], ref.codes)
