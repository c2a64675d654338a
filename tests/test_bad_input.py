"""Bad input, table-driven, over the three estimators, the accessor and the CLI.

Every case either raises an error whose message names the problem (asserted
with a regular expression on the message) or gives a result that is checked
against a reference: the same fit on clean input (booleans as labels against
the 0/1 fit, integer weights against repeated rows, ...), scikit-learn's
LogisticRegression, or the first-order optimality condition of the
objective. No case may return NaN, hang or crash with an unrelated error.

The data are one small float64 C-contiguous matrix, so the numba kernels of
the tempered model see the signature they were already compiled for.
"""

import re
import warnings

import numpy as np
import pandas as pd
import pytest
from cli_checks import one_error_line
from scipy.special import expit
from scipy.stats import norm
from sklearn.exceptions import DataConversionWarning
from sklearn.linear_model import LogisticRegression

from skbayeslogit import (
    LaplaceLogisticClassifier,
    ProbitClassifier,
    TemperedLogisticClassifier,
)
from skbayeslogit.cli import main

# A fixed prior keeps each fit to one Newton solve ("auto" runs about twenty).
ESTIMATORS = {
    "laplace": lambda **kw: LaplaceLogisticClassifier(prior_scale=1.0, **kw),
    "probit": lambda **kw: ProbitClassifier(prior_scale=1.0, **kw),
    "tempered": lambda **kw: TemperedLogisticClassifier(prior_scale=1.0, **kw),
}
NAMES = list(ESTIMATORS)

RNG = np.random.default_rng(20240611)
N, D = 40, 3
X = RNG.normal(size=(N, D))
Y = (X[:, 0] + RNG.normal(size=N) > 0).astype(np.int64)
FRAME = pd.DataFrame(X, columns=["firmness", "starch", "bruise"])

# Agreement between two fits of the same problem reached through different
# input types: the solvers stop on a gradient / decrement test (tol 1e-8 for
# Newton, 1e-6 per row for L-BFGS), far below this; inputs that convert to
# the same float64 matrix give bit-identical fits, checked exactly instead.
FIT_AGREEMENT = 1e-6


def _fit(name, Xf, yf, sample_weight=None, **kw):
    return ESTIMATORS[name](**kw).fit(Xf, yf, sample_weight=sample_weight)


@pytest.fixture(scope="module")
def reference():
    """The clean 0/1 fit of each estimator."""
    return {name: _fit(name, X, Y) for name in NAMES}


# ----------------------------------------------------------------- fit errors


def _with(value, at=(3, 1)):
    bad = X.copy()
    bad[at] = value
    return bad


def _obj_with(value):
    bad = X.astype(object)
    bad[2, 2] = value
    return bad


# (case, X, y, sample_weight, message regex)
FIT_ERRORS = [
    ("nan feature", _with(np.nan), Y, None, r"NaN in 1 row\(s\) \(first at row 3, column 1"),
    ("inf feature", _with(np.inf), Y, None, r"X contains infinity in 1 row\(s\) \(first at row 3"),
    ("-inf feature", _with(-np.inf), Y, None, "X contains infinity in 1 row"),
    ("nan and inf", _with(np.inf, (5, 0)) * np.where(np.arange(N) == 1, np.nan, 1.0)[:, None], Y,
     None, "NaN in 1 row\\(s\\) and infinity in 1 row\\(s\\) \\(first at row 1, column 0"),
    ("huge feature", _with(1e200), Y, None, "magnitude 1e\\+200.*Rescale"),
    ("tiny feature column", np.column_stack([X, np.full(N, 1e-200)]), Y, None,
     "column 3 has values of magnitude 1e-200"),
    ("empty input", np.empty((0, D)), np.empty(0), None, "0 sample\\(s\\)"),
    ("no columns", np.empty((N, 0)), Y, None, "0 feature\\(s\\)"),
    ("one row", X[:1], Y[:1], None, "only one class"),
    ("one class", X, np.zeros(N), None, "only one class \\(0.0\\)"),
    ("one string class", X, np.full(N, "keep"), None, "only one class \\('keep'\\)"),
    ("all-zero weights", X, Y, np.zeros(N), "at least one non-zero"),
    ("negative weights", X, Y, -np.ones(N), "Negative values in data passed to `sample_weight`"),
    ("one negative weight", X, Y, np.r_[-1.0, np.ones(N - 1)], "Negative values"),
    ("nan weight", X, Y, np.r_[np.nan, np.ones(N - 1)], "sample_weight contains NaN"),
    ("inf weight", X, Y, np.r_[np.inf, np.ones(N - 1)], "sample_weight contains infinity"),
    ("weights leave one class", X, Y, (Y == 1).astype(float),
     "only one class has positive sample_weight"),
    ("complex weights", X, Y, np.ones(N, dtype=complex), "sample_weight contains complex"),
    ("weights too short", X, Y, np.ones(N - 1), "sample_weight.shape == \\(39,\\), expected"),
    ("weights 2-D", X, Y, np.ones((N, 2)), "Sample weights must be 1D"),
    ("y is None", X, None, None, "requires y to be passed, but the target y is None"),
    ("y too short", X, Y[:-1], None, "inconsistent numbers of samples: \\[40, 39\\]"),
    ("y two columns", X, np.column_stack([Y, Y]), None, "y should be a 1d array"),
    ("X 1-D", X[:, 0], Y, None, "got 1D array instead \\(shape \\(40,\\)\\). Reshape"),
    ("X 3-D", X[:, :, None], Y, None, "dim 3"),
    ("string features", np.array([["a", "b", "c"]] * N), Y, None, "X holds strings"),
    ("numeric strings", X.astype(str), Y, None, "X holds strings.*astype\\(float\\)"),
    ("object with text", _obj_with("big"), Y, None, "object dtype\\) holds strings such as 'big'"),
    ("object with None", _obj_with(None), Y, None, "X contains NaN in 1 row"),
    ("object with complex", _obj_with(1 + 2j), Y, None, "holds complex numbers"),
    ("complex features", X.astype(complex), Y, None, "X contains complex numbers"),
    ("str frame column", FRAME.assign(grade=pd.Series(["A"] * N, dtype="str")), Y, None,
     "non-numeric feature column\\(s\\): grade"),
    ("categorical frame column", FRAME.assign(grade=pd.Categorical(["A", "B"] * (N // 2))), Y,
     None, "non-numeric feature column\\(s\\): grade"),
    ("object frame column", FRAME.assign(grade=pd.Series([1.0] * N, dtype=object)), Y, None,
     "non-numeric feature column\\(s\\): grade"),
    ("complex frame column", FRAME.assign(z=X[:, 0].astype(complex)), Y, None,
     "non-numeric feature column\\(s\\): z"),
    ("nullable frame with NA", FRAME.astype("Float64").mask(FRAME.index.to_series() == 1, pd.NA),
     Y, None, "X contains NaN in 1 row\\(s\\) \\(first at row 1, column 0"),
    ("fractional labels", X, Y * 0.5 + 0.25, None, "Unknown label type: continuous"),
    ("continuous labels", X, X[:, 0], None, "Unknown label type: continuous"),
    ("nan label", X, np.where(np.arange(N) == 3, np.nan, Y), None, "y has 1 missing label"),
    ("None label", X, np.array(["a", None] * (N // 2), dtype=object), None,
     "y has 20 missing label"),
    ("pd.NA in str labels", X, pd.Series(["a", None, "b", "b"] * (N // 4), dtype="str"), None,
     "y has 10 missing label"),
    ("pd.NA in Int64 labels", X, pd.Series(Y, dtype="Int64").mask(pd.Series(np.arange(N)) == 0),
     None, "y has 1 missing label"),
    ("mixed label types", X, np.array([1, "a"] * (N // 2), dtype=object), None,
     "y mixes label types \\(int, str\\)"),
    ("complex labels", X, Y.astype(complex), None, "y contains complex numbers"),
]  # fmt: skip


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(
    ("case", "Xb", "yb", "wb", "match"), FIT_ERRORS, ids=[c[0] for c in FIT_ERRORS]
)
def test_fit_rejects_with_a_specific_message(name, case, Xb, yb, wb, match):
    with pytest.raises(ValueError, match=match) as info:
        _fit(name, Xb, yb, sample_weight=wb)
    # One idea per message: no array dumps (numpy's repr of the data).
    assert "\n[[" not in str(info.value) and len(str(info.value)) < 400, case


def test_three_classes_for_the_binary_probit():
    with pytest.raises(ValueError, match="Only binary classification is supported"):
        _fit("probit", X, np.arange(N) % 3)


def test_sparse_input_is_refused_with_the_conversion_named():
    import scipy.sparse as sp

    for name in NAMES:
        with pytest.raises(TypeError, match="Sparse data was passed.*toarray"):
            _fit(name, sp.csr_matrix(X), Y)


# (estimator name or None for all, constructor parameters, regex)
PARAM_ERRORS = [
    (None, {"prior_scale": np.nan}, "prior_scale must be a positive finite float; got nan"),
    (None, {"prior_scale": -1.0}, "prior_scale must be a positive finite float"),
    (None, {"prior_scale": np.inf}, "prior_scale must be a positive finite float; got inf"),
    (None, {"prior_scale": "big"}, "prior_scale must be"),
    (None, {"max_iter": 10.0}, "max_iter must be a positive integer"),
    (None, {"tol": np.nan}, "tol must be a positive float; got nan"),
    (None, {"fit_intercept": "no"}, "fit_intercept must be True or False; got 'no'"),
    ("tempered", {"t1": np.nan}, "t1 must be in \\[0, 1\\].*got nan"),
    ("tempered", {"t1": 1.5}, "t1 must be in \\[0, 1\\]"),
    ("tempered", {"t1": -0.1}, "t1 must be in \\[0, 1\\]"),
    ("tempered", {"t2": 0.5}, "t2 must be in \\[1, 5\\].*finite support"),
    ("tempered", {"t2": np.inf}, "t2 must be in \\[1, 5\\]"),
    ("tempered", {"t2": 6.0}, "t2 must be in \\[1, 5\\]"),
    ("tempered", {"label_smoothing": 1.0}, "label_smoothing must be in \\[0, 1\\)"),
    ("tempered", {"label_smoothing": np.nan}, "label_smoothing must be in \\[0, 1\\)"),
    ("tempered", {"warm_start": "yes"}, "warm_start must be True or False"),
    ("tempered", {"start": "random"}, "start must be 'convex' or 'zero'"),
    ("laplace", {"predictive": "exact"}, "predictive must be one of"),
    ("probit", {"predictive": "probit"}, "predictive must be one of"),
]
PARAM_CASES = [
    (name, params, match)
    for only, params, match in PARAM_ERRORS
    for name in ([only] if only else NAMES)
]


@pytest.mark.parametrize(("name", "params", "match"), PARAM_CASES)
def test_bad_parameters_are_named(name, params, match):
    kw = dict(params)
    if "prior_scale" in kw:
        est = type(ESTIMATORS[name]())(**kw)
    else:
        est = ESTIMATORS[name](**kw)
    with pytest.raises(ValueError, match=match):
        est.fit(X, Y)


def test_bad_temperature_type_is_a_type_error():
    for value in ("hot", True):
        with pytest.raises(TypeError, match="t1 must be a float"):
            TemperedLogisticClassifier(t1=value).fit(X, Y)


# ------------------------------------------------------------ predict errors

PREDICT_ERRORS = [
    ("fewer columns", X[:, :2], "X has 2 features, but .* is expecting 3"),
    ("more columns", np.hstack([X, X]), "X has 6 features, but .* is expecting 3"),
    ("1-D row", X[0], "Expected 2D array, got 1D array"),
    ("no rows", np.empty((0, D)), "0 sample\\(s\\)"),
    ("nan", _with(np.nan), "Input X contains NaN"),
    ("inf", _with(np.inf), "Input X contains infinity"),
    ("huge", _with(1e300), "magnitude 1e\\+300"),
    ("complex", X.astype(complex), "X contains complex numbers"),
    ("strings", X.astype(str), "X holds strings"),
]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(
    ("case", "Xb", "match"), PREDICT_ERRORS, ids=[c[0] for c in PREDICT_ERRORS]
)
@pytest.mark.parametrize("method", ["predict", "predict_proba", "decision_function"])
def test_predict_rejects_with_a_specific_message(reference, name, case, Xb, match, method):
    with pytest.raises(ValueError, match=match):
        getattr(reference[name], method)(Xb)


@pytest.mark.parametrize("name", ["laplace", "probit"])
@pytest.mark.parametrize(
    ("value", "match"),
    [
        (np.nan, "Input X contains NaN"),
        (np.inf, "Input X contains infinity"),
        (1e300, "magnitude 1e\\+300"),
    ],
    ids=["nan", "inf", "huge"],
)
@pytest.mark.parametrize(
    "method", ["predict_proba", "decision_function", "logit_moments", "predict_interval"]
)
def test_binary_moment_pass_rejects_bad_values_anywhere(reference, name, value, match, method):
    """The binary Gaussian-posterior predictions check X inside their moment
    pass (on worker threads for large X): a bad value in the last row of
    200,000 is named just as in a small X."""
    big = np.tile(X, (200_000 // N, 1))
    big[-1, 2] = value
    with pytest.raises(ValueError, match=match):
        getattr(reference[name], method)(big)


FRAME_PREDICT_ERRORS = [
    (
        "renamed column",
        FRAME.rename(columns={"starch": "sugar"}),
        "(?s)Feature names unseen.*sugar",
    ),
    ("reordered columns", FRAME[["bruise", "starch", "firmness"]], "same order"),
    ("str column", FRAME.astype(str), "non-numeric feature column\\(s\\): firmness, starch"),
]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(
    ("case", "frame", "match"), FRAME_PREDICT_ERRORS, ids=[c[0] for c in FRAME_PREDICT_ERRORS]
)
def test_frame_predict_rejects_mismatched_columns(name, case, frame, match):
    model = _fit(name, FRAME, Y)
    with pytest.raises(ValueError, match=match):
        model.predict_proba(frame)


def test_posterior_methods_reject_bad_levels_and_counts(reference):
    for name in ("laplace", "probit"):
        model = reference[name]
        for level in (np.nan, 0.0, 1.0, "0.9", True):
            with pytest.raises(ValueError, match="level must be a probability strictly between"):
                model.predict_interval(X, level=level)
            with pytest.raises(ValueError, match="level must be a probability strictly between"):
                model.coef_table(level=level)
        for n in (0, -1, 1.5, np.nan):
            with pytest.raises(ValueError, match="n must be a positive integer"):
                model.sample_coef(n)


# ----------------------------------------------------------- correct results


def _same_fit(a, b, exact=False):
    """Two fits of the same problem agree on parameters and probabilities."""
    if exact:
        np.testing.assert_array_equal(a.coef_, b.coef_)
        np.testing.assert_array_equal(a.intercept_, b.intercept_)
    else:
        np.testing.assert_allclose(a.coef_, b.coef_, rtol=0, atol=FIT_AGREEMENT)
        np.testing.assert_allclose(a.intercept_, b.intercept_, rtol=0, atol=FIT_AGREEMENT)


# (case, labels, expected classes_): relabelling the same 0/1 split must give
# the 0/1 fit exactly (the solver sees the same codes), with predictions in
# the caller's label type.
LABEL_CASES = [
    ("float 0/1", Y.astype(float), np.array([0.0, 1.0])),
    ("bool", Y.astype(bool), np.array([False, True])),
    ("pandas boolean", pd.Series(Y.astype(bool), dtype="boolean"), np.array([False, True])),
    ("pandas Int64", pd.Series(Y, dtype="Int64"), np.array([0, 1])),
    ("strings", np.where(Y == 1, "sell", "keep"), np.array(["keep", "sell"])),
    ("pandas str", pd.Series(np.where(Y == 1, "sell", "keep"), dtype="str"),
     np.array(["keep", "sell"])),
    ("categorical", pd.Series(pd.Categorical(np.where(Y == 1, "sell", "keep"))),
     np.array(["keep", "sell"])),
    ("object ints", Y.astype(object), None),
    ("list of ints", Y.tolist(), np.array([0, 1])),
    ("-1/+1", 2 * Y - 1, np.array([-1, 1])),
]  # fmt: skip


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(
    ("case", "labels", "classes"), LABEL_CASES, ids=[c[0] for c in LABEL_CASES]
)
def test_relabelled_targets_give_the_01_fit(reference, name, case, labels, classes):
    if classes is None:
        # Object-dtype integers are "unknown" to scikit-learn's type check.
        with pytest.raises(ValueError, match="Unknown label type"):
            _fit(name, X, labels)
        return
    model = _fit(name, X, labels)
    _same_fit(model, reference[name], exact=True)
    np.testing.assert_array_equal(model.classes_, classes)
    if classes.dtype.kind != "U":  # strings may come back as object arrays
        assert model.classes_.dtype.kind == classes.dtype.kind
    expected = classes[reference[name].predict(X)]
    np.testing.assert_array_equal(model.predict(X), expected)


# (case, X as given): inputs that convert to the same float64 matrix.
SAME_MATRIX_CASES = [
    ("object floats", X.astype(object)),
    ("list of lists", X.tolist()),
    ("Fortran order", np.asfortranarray(X)),
    ("read-only", np.frombuffer(X.tobytes(), dtype=np.float64).reshape(N, D)),
    ("strided view", np.repeat(X, 2, axis=1)[:, ::2]),
    ("pandas Float64", FRAME.astype("Float64")),
    ("DataFrame", FRAME),
]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(("case", "Xs"), SAME_MATRIX_CASES, ids=[c[0] for c in SAME_MATRIX_CASES])
def test_inputs_with_the_same_values_give_the_same_fit(reference, name, case, Xs):
    _same_fit(_fit(name, Xs, Y), reference[name], exact=True)


@pytest.mark.parametrize("name", NAMES)
def test_column_vector_y_warns_and_fits(reference, name):
    with pytest.warns(DataConversionWarning, match="column-vector y"):
        model = _fit(name, X, Y[:, None])
    _same_fit(model, reference[name], exact=True)


@pytest.mark.parametrize("name", NAMES)
def test_integer_weights_equal_repeated_rows(name):
    """The objective is a weighted sum (DESIGN.md), so weight 2 = two copies."""
    w = np.where(np.arange(N) % 3 == 0, 2.0, 1.0)
    rows = np.repeat(np.arange(N), w.astype(int))
    _same_fit(_fit(name, X, Y, sample_weight=w), _fit(name, X[rows], Y[rows]))
    # A scalar weight is every row repeated; bool weights are 0/1 weights.
    _same_fit(_fit(name, X, Y, sample_weight=2.0), _fit(name, np.vstack([X, X]), np.r_[Y, Y]))
    keep = np.arange(N) % 4 > 0
    _same_fit(_fit(name, X, Y, sample_weight=keep), _fit(name, X[keep], Y[keep]))


@pytest.mark.parametrize("name", NAMES)
def test_constant_and_zero_columns_get_no_weight(reference, name):
    """With a flat intercept prior, the intercept absorbs a constant column:
    the likelihood depends only on c * w_c + b, the prior pulls w_c to 0, so
    the MAP has w_c = 0 and the other parameters of the fit without it. A
    zero column has no likelihood gradient at all."""
    for extra, value in (("constant", 3.0), ("zero", 0.0)):
        model = _fit(name, np.column_stack([X, np.full(N, value)]), Y)
        assert abs(model.coef_[0, -1]) < FIT_AGREEMENT, extra
        np.testing.assert_allclose(
            model.coef_[0, :-1], reference[name].coef_[0], rtol=0, atol=FIT_AGREEMENT
        )


@pytest.mark.parametrize("name", NAMES)
def test_duplicated_column_splits_the_coefficient(name):
    """With an L2 prior of sd s, a duplicated column's pair (a, b) enters the
    likelihood only as x0 (a + b), and (a^2 + b^2) / (2 s^2) is smallest at
    a = b, where it is (a + b)^2 / (4 s^2). A single column sqrt(2) x0 with
    coefficient c' and prior c'^2 / (2 s^2) is the same problem for
    a + b = sqrt(2) c': so a = b = c' / sqrt(2), other coefficients equal."""
    # The tempered model's default tol (1e-6 on the mean gradient) leaves
    # parameter errors of about tol / curvature ~ 1e-5; 1e-8 puts both fits
    # well inside FIT_AGREEMENT.
    kw = {"tol": 1e-8} if name == "tempered" else {}
    twin = _fit(name, np.column_stack([X, X[:, 0]]), Y, **kw)
    merged_X = X.copy()
    merged_X[:, 0] *= np.sqrt(2.0)
    merged = _fit(name, merged_X, Y, **kw)
    np.testing.assert_allclose(twin.coef_[0, 0], twin.coef_[0, 3], rtol=0, atol=FIT_AGREEMENT)
    np.testing.assert_allclose(
        twin.coef_[0, [0, 3]], merged.coef_[0, 0] / np.sqrt(2.0), rtol=0, atol=FIT_AGREEMENT
    )
    np.testing.assert_allclose(twin.coef_[0, 1:3], merged.coef_[0, 1:], rtol=0, atol=FIT_AGREEMENT)
    np.testing.assert_allclose(twin.intercept_, merged.intercept_, rtol=0, atol=FIT_AGREEMENT)


def _probit_stationarity(model, Xw, yw, s):
    """Gradient of the penalised probit objective at the fit (0 at the MAP)."""
    eta = Xw @ model.coef_[0] + model.intercept_[0]
    sgn = 2 * yw - 1
    # d/d eta of -log Phi(s eta) = -s phi(eta) / Phi(s eta)
    g = -sgn * np.exp(norm.logpdf(eta) - norm.logcdf(sgn * eta))
    return np.r_[Xw.T @ g + model.coef_[0] / s**2, g.sum()]


def test_more_features_than_rows_with_a_prior():
    """d = 30 > n = 10: the likelihood alone has no unique optimum, the prior
    makes the objective strictly convex. References: scikit-learn's
    LogisticRegression(C = s^2) (same objective, unpenalised intercept) for
    the logistic model; zero gradient of the probit objective; the tempered
    model: finite and proper probabilities."""
    rng = np.random.default_rng(3)
    Xw = rng.normal(size=(10, 30))
    yw = np.array([0, 1] * 5)
    lap = _fit("laplace", Xw, yw)
    ref = LogisticRegression(C=1.0, solver="newton-cholesky", tol=1e-12).fit(Xw, yw)
    np.testing.assert_allclose(lap.coef_, ref.coef_, atol=1e-6)
    pro = _fit("probit", Xw, yw)
    # Newton stops at half squared decrement < 1e-8; the gradient is then of
    # order sqrt(1e-8 * lambda_max(H)) < 1e-3 here.
    assert np.max(np.abs(_probit_stationarity(pro, Xw, yw, 1.0))) < 1e-3
    tem = _fit("tempered", Xw, yw)
    for model in (lap, pro, tem):
        P = model.predict_proba(Xw)
        assert np.all(np.isfinite(P)) and np.allclose(P.sum(axis=1), 1.0, rtol=0, atol=1e-12)
        assert np.all(np.isfinite(model.coef_))


def test_more_features_than_rows_without_a_prior_is_refused():
    rng = np.random.default_rng(3)
    Xw = rng.normal(size=(10, 30))
    yw = np.array([0, 1] * 5)
    for cls in (LaplaceLogisticClassifier, ProbitClassifier):
        with pytest.raises(ValueError, match="linearly dependent without a prior"):
            cls(prior_scale=None).fit(Xw, yw)


@pytest.mark.parametrize("name", NAMES)
def test_two_rows_with_a_prior_are_a_proper_fit(name):
    model = _fit(name, X[:2], np.array([0, 1]))
    P = model.predict_proba(X)
    assert np.all((P > 0) & (P < 1)) and np.allclose(P.sum(axis=1), 1.0)
    # The two rows are fitted in the direction of their labels.
    assert model.predict_proba(X[:2])[1, 1] > model.predict_proba(X[:2])[0, 1]


def test_laplace_binary_fit_matches_sklearn_on_the_suite_data(reference):
    # Anchor for the "same fit" comparisons above: the reference is right
    # (scikit-learn's LogisticRegression(C = s^2) has the same objective).
    ref = LogisticRegression(C=1.0, solver="newton-cholesky", tol=1e-12).fit(X, Y)
    np.testing.assert_allclose(reference["laplace"].coef_, ref.coef_, atol=1e-7)
    plug_in = _fit("laplace", X, Y, predictive="map").predict_proba(X)[:, 1]
    np.testing.assert_allclose(plug_in, expit(X @ ref.coef_[0] + ref.intercept_[0]), atol=1e-7)


# ------------------------------------------------------------------ accessor

BASE = FRAME.assign(grade=np.where(Y == 1, "sell", "keep"))


def _nan_at(frame, column, row=3):
    out = frame.copy()
    out.loc[row, column] = np.nan
    return out


ACCESSOR_ERRORS = [
    ("nan feature", _nan_at(BASE, "starch"), "1 of 40 rows have missing"),
    ("inf feature", BASE.assign(starch=_with(np.inf)[:, 1]), "infinite values: starch"),
    ("missing label", BASE.assign(grade=BASE.grade.mask(BASE.index == 0)),
     "missing values \\(per column: grade: 1\\)"),
    ("empty frame", BASE.iloc[:0], "no rows to fit"),
    ("one row", BASE.iloc[:1], "only one class"),
    ("one class", BASE.assign(grade="keep"), "only one class \\('keep'\\)"),
    # Issue 18: text and categorical columns are encoded, not refused; a
    # constant one given by name is still an error that names it.
    ("str feature", BASE.assign(farm=pd.Series(["n"] * N, dtype="str")), "'farm'.*constant"),
    ("object feature", BASE.assign(farm=pd.Series([1.0] * N, dtype=object)),
     "'farm'.*constant"),
    ("complex feature", BASE.assign(z=X[:, 0].astype(complex)), "z \\(complex128\\)"),
    ("continuous target", BASE.assign(grade=X[:, 0]), "non-integer numbers"),
]  # fmt: skip


def _accessor_features(frame):
    extra = [c for c in ("farm", "z") if c in frame.columns]
    return ["firmness", "starch", "bruise", *extra]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize(
    ("case", "frame", "match"), ACCESSOR_ERRORS, ids=[c[0] for c in ACCESSOR_ERRORS]
)
def test_accessor_rejects_with_a_specific_message(name, case, frame, match):
    with pytest.raises(ValueError, match=match):
        frame.bayeslogit.fit("grade", _accessor_features(frame), name, prior_scale=1.0)


@pytest.mark.parametrize("name", NAMES)
def test_accessor_relabelled_and_padded_frames_give_the_same_probabilities(name):
    """Boolean, nullable and categorical labels, nullable features and an
    extra constant column give the clean frame's probabilities (the constant
    column has sd 0, the standardiser leaves it unscaled, and the prior keeps
    its coefficient at 0, as shown for the bare estimators above)."""
    feats = ["firmness", "starch", "bruise"]
    ref = BASE.bayeslogit.fit("grade", feats, name, prior_scale=1.0)
    P = ref.predict_proba(BASE[feats])
    for case, frame, extra in (
        ("bool labels", BASE.assign(grade=Y.astype(bool)), []),
        ("boolean labels", BASE.assign(grade=pd.array(Y.astype(bool), dtype="boolean")), []),
        ("Int64 labels", BASE.assign(grade=pd.array(Y, dtype="Int64")), []),
        ("category labels", BASE.assign(grade=BASE.grade.astype("category")), []),
        ("Float64 features", BASE.astype({"starch": "Float64"}), []),
        ("constant column", BASE.assign(const=7.0), ["const"]),
    ):
        model = frame.bayeslogit.fit("grade", feats + extra, name, prior_scale=1.0)
        table = frame.bayeslogit.predict_table(model)
        prob = table.filter(regex="^prob_[^_]*$").to_numpy(dtype=float)[:, -1]
        np.testing.assert_allclose(prob, P[:, 1], rtol=0, atol=FIT_AGREEMENT, err_msg=case)
        assert len(model.classes_) == 2, case


# ---------------------------------------------------------------------- CLI


_cli_error = one_error_line


CLI_ERRORS = [
    ("nan feature", _nan_at(BASE, "starch"), None, "1 of 40 rows have"),
    ("inf feature", BASE.assign(starch=_with(np.inf)[:, 1]), None, "infinite values: starch"),
    ("header only", None, "firmness,starch,bruise,grade\n", "has a header but no data rows"),
    ("empty file", None, "", "cannot read .* as CSV"),
    ("ragged rows", None, "a,b,grade\n1,2,x\n1,2,3,4\n", "cannot read .* as CSV"),
    ("one row", BASE.iloc[:1], None, "only one class"),
    ("one class", BASE.assign(grade="keep"), None, "only one class \\('keep'\\)"),
    # Issue 18: text features are encoded; a constant one named in
    # --features is still refused, by name.
    ("text feature", BASE.assign(farm="north"), "features", "'farm'.*constant"),
    ("complex text", BASE.assign(z="1+2j"), "features", "'z'.*constant"),
    ("continuous target", BASE.assign(grade=X[:, 0]), None, "holds non-integer numbers"),
    ("missing target column", BASE.drop(columns="grade"), None, "target column\\(s\\) not in"),
]  # fmt: skip


@pytest.mark.parametrize(
    ("case", "frame", "text", "match"), CLI_ERRORS, ids=[c[0] for c in CLI_ERRORS]
)
def test_cli_report_errors_are_one_specific_line(tmp_path, capsys, case, frame, text, match):
    path = tmp_path / "data.csv"
    args = []
    if frame is not None:
        frame.to_csv(path, index=False)
        if text == "features":
            extra = [c for c in frame.columns if c in ("farm", "z")]
            args = ["--features", ",".join(["firmness", *extra])]
    else:
        path.write_text(text)
    line = _cli_error(
        capsys,
        ["report", str(path), "--target", "grade", "--models", "laplace", "--cv", "2",
         "--quiet", *args],
    )  # fmt: skip
    assert re.search(match, line), line


@pytest.fixture(scope="module")
def saved_model(tmp_path_factory):
    out = tmp_path_factory.mktemp("cli_model")
    path = out / "train.csv"
    BASE.to_csv(path, index=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main(["report", str(path), "--target", "grade", "--models", "laplace",
                     "--cv", "2", "--quiet", "--out", str(out / "report")])  # fmt: skip
    assert code == 0
    return out / "report" / "model_laplace.skops"


# A missing feature cell no longer stops the batch (issue 18): that row gets
# empty probabilities and a note (tests/test_cli_roles.py).
SCORE_ERRORS = [
    ("text feature", FRAME.assign(starch="high"), None, "starch \\(str\\)"),
    ("header only", None, "firmness,starch,bruise\n", "has a header but no data rows"),
    ("missing column", FRAME.drop(columns="bruise"), None, "lack the model's.*bruise"),
]  # fmt: skip


@pytest.mark.parametrize(
    ("case", "frame", "text", "match"), SCORE_ERRORS, ids=[c[0] for c in SCORE_ERRORS]
)
def test_cli_score_errors_are_one_specific_line(tmp_path, capsys, saved_model, case, frame, text,
                                                match):  # fmt: skip
    path = tmp_path / "new.csv"
    if frame is not None:
        frame.to_csv(path, index=False)
    else:
        path.write_text(text)
    line = _cli_error(capsys, ["score", str(saved_model), str(path), "--quiet"])
    assert re.search(match, line), line


def test_cli_score_rejects_a_file_that_is_not_a_model(tmp_path, capsys):
    bad = tmp_path / "model.joblib"
    bad.write_bytes(b"not a pickle")
    new = tmp_path / "new.csv"
    FRAME.to_csv(new, index=False)
    assert "cannot load a model" in _cli_error(capsys, ["score", str(bad), str(new)])


def test_cli_score_extra_and_reordered_columns_give_the_same_predictions(tmp_path, saved_model):
    from skbayeslogit._output.model_file import load_model_file

    model = load_model_file(saved_model)["model"]
    expected = model.predict_proba(FRAME)[:, 1]
    for case, frame in (
        ("extra column", FRAME.assign(note=1)),
        ("reordered", FRAME[["bruise", "firmness", "starch"]]),
    ):
        path = tmp_path / f"{case}.csv"
        frame.to_csv(path, index=False)
        out = tmp_path / f"{case}_pred.csv"
        assert main(["score", str(saved_model), str(path), "--out", str(out), "--quiet"]) == 0
        got = pd.read_csv(out)["prob_sell"].to_numpy()
        # The CSV round trip writes 17 significant digits (pandas default repr).
        np.testing.assert_allclose(got, expected, rtol=1e-15, err_msg=case)
