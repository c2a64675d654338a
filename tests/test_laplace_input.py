"""Bad input, separation and collinearity for LaplaceLogisticClassifier."""

import warnings

import numpy as np
import pandas as pd
import pytest

from skbayeslogit import CollinearityWarning, LaplaceLogisticClassifier, SeparationWarning


@pytest.fixture
def data():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(60, 3))
    y = (rng.random(60) < 1 / (1 + np.exp(-X[:, 0]))).astype(int)
    return X, y


@pytest.mark.parametrize("value", [np.nan, np.inf, -np.inf])
def test_non_finite_features_are_rejected(data, value):
    X, y = data
    X = X.copy()
    X[5, 1] = value
    with pytest.raises(ValueError, match="NaN|infinity"):
        LaplaceLogisticClassifier().fit(X, y)


def test_one_class_is_rejected(data):
    X, _ = data
    with pytest.raises(ValueError, match="only one class"):
        LaplaceLogisticClassifier().fit(X, np.zeros(len(X)))


def test_weights_leaving_one_class_are_rejected(data):
    X, y = data
    w = (y == 1).astype(float)
    with pytest.raises(ValueError, match="only one class has positive sample_weight"):
        LaplaceLogisticClassifier().fit(X, y, sample_weight=w)
    with pytest.raises(ValueError, match="[Nn]egative"):
        LaplaceLogisticClassifier().fit(X, y, sample_weight=-np.ones(len(y)))
    with pytest.raises(ValueError, match="non-zero|sums to zero"):
        LaplaceLogisticClassifier().fit(X, y, sample_weight=np.zeros(len(y)))


def test_wrong_shapes(data):
    X, y = data
    with pytest.raises(ValueError, match="inconsistent numbers of samples"):
        LaplaceLogisticClassifier().fit(X, y[:-1])
    model = LaplaceLogisticClassifier().fit(X, y)
    with pytest.raises(ValueError, match="expecting 3 features"):
        model.predict_proba(X[:, :2])


@pytest.mark.parametrize(
    "params, match",
    [
        ({"prior_scale": -1.0}, "prior_scale must be a positive finite float"),
        ({"prior_scale": "big"}, "prior_scale must be"),
        ({"intercept_prior_scale": 0.0}, "intercept_prior_scale"),
        ({"predictive": "exact"}, "predictive must be one of"),
        ({"max_iter": 0}, "max_iter"),
        ({"tol": -1.0}, "tol"),
    ],
)
def test_bad_parameters_are_named(data, params, match):
    X, y = data
    with pytest.raises(ValueError, match=match):
        LaplaceLogisticClassifier(**params).fit(X, y)


def test_level_out_of_range(data):
    X, y = data
    model = LaplaceLogisticClassifier().fit(X, y)
    for level in (0.0, 1.0, 1.5):
        with pytest.raises(ValueError, match="level must be"):
            model.coef_table(level=level)
        with pytest.raises(ValueError, match="level must be"):
            model.predict_interval(X, level=level)


def test_string_labels_and_str_frame_columns(data):
    X, y = data
    frame = pd.DataFrame(X, columns=["firmness_n", "starch_index", "bruise_share_pct"])
    labels = pd.Series(np.where(y == 1, "keep", "sell"), dtype="str")
    model = LaplaceLogisticClassifier().fit(frame, labels)
    assert list(model.classes_) == ["keep", "sell"]
    frame["orchard"] = pd.Series(["north"] * len(frame), dtype="str")
    with pytest.raises(ValueError, match="non-numeric feature column\\(s\\): orchard"):
        LaplaceLogisticClassifier().fit(frame, labels)


def test_float32_and_read_only_input_give_the_float64_result(data):
    X, y = data
    ref = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
    X32 = X.astype(np.float32)
    fit32 = LaplaceLogisticClassifier(prior_scale=1.0).fit(X32, y)
    ref32 = LaplaceLogisticClassifier(prior_scale=1.0).fit(X32.astype(np.float64), y)
    np.testing.assert_array_equal(fit32.coef_, ref32.coef_)
    assert np.abs(fit32.coef_ - ref.coef_).max() < 1e-5
    frozen = X.copy()
    frozen.setflags(write=False)
    np.testing.assert_array_equal(
        LaplaceLogisticClassifier(prior_scale=1.0).fit(frozen, y).coef_, ref.coef_
    )


def test_caller_data_is_not_modified(data):
    X, y = data
    frame = pd.DataFrame(X, columns=list("abc"))
    weights = np.linspace(0.5, 2, len(y))
    copies = (X.copy(), y.copy(), frame.copy(), weights.copy())
    LaplaceLogisticClassifier().fit(X, y, sample_weight=weights)
    LaplaceLogisticClassifier().fit(frame, y)
    np.testing.assert_array_equal(X, copies[0])
    np.testing.assert_array_equal(y, copies[1])
    pd.testing.assert_frame_equal(frame, copies[2])
    np.testing.assert_array_equal(weights, copies[3])


def test_complete_separation_without_prior_warns(data):
    X, _ = data
    y = (X[:, 0] > 0).astype(int)
    with pytest.warns(SeparationWarning, match="does not exist"):
        LaplaceLogisticClassifier(prior_scale=None).fit(X, y)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
    assert np.all(np.isfinite(model.coef_)) and np.abs(model.coef_).max() < 10


def test_quasi_complete_separation_without_prior_warns():
    # Class 1 exactly when x > 0, with a tie at x = 0 carrying both labels:
    # quasi-complete separation (Albert & Anderson 1984).
    x = np.r_[np.linspace(-3, -0.1, 20), 0.0, 0.0, np.linspace(0.1, 3, 20)]
    y = np.r_[np.zeros(20), 0, 1, np.ones(20)].astype(int)
    z = np.random.default_rng(1).normal(size=len(x))
    with pytest.warns(SeparationWarning):
        LaplaceLogisticClassifier(prior_scale=None).fit(np.column_stack([x, z]), y)


def test_overlapping_classes_without_prior_do_not_warn(data):
    X, y = data
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        LaplaceLogisticClassifier(prior_scale=None).fit(X, y)


def test_collinear_columns_without_prior_name_the_columns(data):
    X, y = data
    frame = pd.DataFrame(X, columns=["firmness_n", "brix", "starch"])
    frame["firmness_kgf"] = frame["firmness_n"] / 9.80665
    with pytest.raises(ValueError, match="linearly dependent.*firmness"):
        LaplaceLogisticClassifier(prior_scale=None).fit(frame, y)
    # A prior identifies the split between the two columns.
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(frame, y)
    assert np.all(np.isfinite(model.posterior_cov_))


def test_nearly_collinear_columns_warn(data):
    X, y = data
    rng = np.random.default_rng(5)
    # Scaled Hessian condition about 3e12: beyond 1e10 the solve keeps fewer
    # than six significant digits, so the spreads deserve a warning.
    near = np.column_stack([X, X[:, 0] + 1e-6 * rng.normal(size=len(X))])
    with pytest.warns(CollinearityWarning, match="x3"):
        LaplaceLogisticClassifier(prior_scale=None).fit(near, y)


@pytest.mark.parametrize(
    "shape", [(1, 1), (3, 7), (1_000, 1), (1_000, 3), (12_345, 50), (5, 2_000), (70_001, 20)]
)
def test_column_range_equals_numpy(shape):
    """The wide-view range check gives numpy's column min and max exactly,
    NaN and infinity included, for every block / remainder split."""
    from skbayeslogit._linear.columns import column_range as _column_range
    from skbayeslogit._linear.columns import overall_range as _overall_range

    rng = np.random.default_rng(sum(shape))
    X = rng.standard_normal(shape) * rng.uniform(0.1, 10, shape[1])
    for special in (None, (np.inf, -np.inf), (np.nan, 1.0)):
        if special is not None:
            X[-1, -1], X[0, 0] = special
        lo, hi = _column_range(X)
        np.testing.assert_array_equal(lo, X.min(axis=0))
        np.testing.assert_array_equal(hi, X.max(axis=0))
        np.testing.assert_array_equal(_overall_range(X), (X.min(), X.max()))


@pytest.mark.parametrize(
    "y",
    [
        np.array([1, 0, 1, 1]),
        np.array([-5, 3, 3, -5, 0], dtype=np.int8),
        np.array([True, False, True]),
        np.array([10**12, 3, 3]),  # wide range: the sorting path
        np.array([2, 0, 2], dtype=np.uint64),
        np.array(["b", "a", "b"]),
        np.array([1.0, 0.0, 1.0]),
    ],
)
def test_label_encoding_equals_numpy_unique(y):
    """Classes (values and dtype) and codes as np.unique(return_inverse=True)."""
    from skbayeslogit._checks.inputs import encode_labels

    classes, codes = encode_labels(y)
    ref_classes, ref_codes = np.unique(y, return_inverse=True)
    assert classes.dtype == ref_classes.dtype and codes.dtype == np.int64
    np.testing.assert_array_equal(classes, ref_classes)
    np.testing.assert_array_equal(codes, ref_codes)


def test_separation_check_on_large_data_uses_a_subset_soundly(monkeypatch):
    """Above 4,000 rows the linear program first runs on the 2,000 rows with
    the smallest margins. A confident but identified fit (rows fitted with
    probability 1 - 1e-12, no separation) must not warn; quasi-complete
    separation hidden among the confident rows (a tied pair at x = 0 decides
    it, Albert & Anderson 1984) must still warn, via the full program."""
    import scipy.optimize

    from skbayeslogit import ProbitClassifier

    calls = []  # rows of each linear program solved
    plain = scipy.optimize.linprog

    def counted(c, A_ub=None, **kwargs):
        calls.append(len(A_ub))
        return plain(c, A_ub=A_ub, **kwargs)

    monkeypatch.setattr(scipy.optimize, "linprog", counted)
    rng = np.random.default_rng(4)
    n = 20_000
    X = rng.normal(size=(n, 2)) * [4.0, 1.0]
    y = (X[:, 0] + rng.normal(size=n) > 0).astype(int)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ProbitClassifier(prior_scale=None).fit(X, y)
    assert calls == [2_000]  # confident rows exist; the subset settled it
    calls.clear()

    # Class 1 exactly when x > 0, both labels at x = 0: no overlap elsewhere.
    x = np.r_[-rng.uniform(0.1, 3, n // 2), 0.0, 0.0, rng.uniform(0.1, 3, n // 2)]
    y = np.r_[np.zeros(n // 2), 0, 1, np.ones(n // 2)].astype(int)
    Xs = np.column_stack([x, rng.normal(size=len(x))])
    with pytest.warns(SeparationWarning, match="complete or quasi-complete"):
        ProbitClassifier(prior_scale=None).fit(Xs, y)
    assert calls == [2_000, n + 2]  # the subset is separable: the full program decides
