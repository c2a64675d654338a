"""Checks of what the user passes: parameters, features, labels.

Every check raises a one-line error that names the problem (the parameter
and its range, the column, the count of bad cells) instead of letting a NaN
or a cryptic message through. The estimators' ``_validate_fit_data`` and
``_validate_predict_data`` (in ``_base.py``), the data sources' block
checks and the accessor call these; ``params`` declares the parameters'
constraints.
"""

import warnings

import numpy as np
import pandas as pd
from sklearn.utils.validation import _check_sample_weight

from .._frame.errors import LabelVariantWarning
from .._linear.columns import column_range, overall_range
from .params import Boolean, Options, PositiveFloat, PositiveInt, Probability, Scale


# -- parameter checks, one at a time (the tables of ``params`` check them all) --
def check_scale(name, value, allow_auto=False):
    """Validate a prior scale: positive finite float, None, or "auto"."""
    return Scale(allow_auto).check(name, value)


def check_positive_int(name, value):
    """Validate an integer >= 1."""
    return PositiveInt().check(name, value)


def check_positive_float(name, value):
    """Validate a real number > 0."""
    return PositiveFloat().check(name, value)


def check_bool(name, value):
    """Validate True or False."""
    return Boolean().check(name, value)


def check_level(level):
    """Validate a credible level strictly between 0 and 1."""
    return Probability().check("level", level)


def check_options(name, value, options):
    """Validate one of ``options``."""
    return Options(*options).check(name, value)


def plain(value):
    """A numpy scalar as the Python value it holds, for readable messages."""
    return value.item() if isinstance(value, np.generic) else value


def reject_non_numeric_frame(X):
    """Name the non-numeric columns of a DataFrame before numpy conversion."""
    if isinstance(X, pd.DataFrame):
        bad = [
            str(c)
            for c, dt in X.dtypes.items()
            if not (pd.api.types.is_numeric_dtype(dt) or pd.api.types.is_bool_dtype(dt))
            or pd.api.types.is_complex_dtype(dt)
        ]
        if bad:
            raise ValueError(
                f"non-numeric feature column(s): {', '.join(bad)}. Encode them first "
                "(for example with sklearn.preprocessing.OneHotEncoder in a "
                "ColumnTransformer) or leave them out of X."
            )


#: Largest feature magnitude accepted. The Hessian (sums of w x_j x_k) and
#: the latent variance (x^T Sigma x) square the features: beyond
#: sqrt(float64 max) ~ 1.3e154 a single square overflows, and 1e4 below that
#: leaves room for sums over 1e8 rows. Nonzero columns below the reciprocal
#: underflow the same products to 0.
MAX_ABS_FEATURE = float(np.sqrt(np.finfo(np.float64).max)) / 1e4


def reject_unusable_array(X, name="X"):
    """Name complex numbers and text in X before numpy's conversion does.

    scikit-learn's messages for these dump the whole array over many lines
    (complex) or name a bare value (strings); ours say what is wrong and what
    to do, in one line. Object arrays are scanned element by element, which
    is slow only for object input, which is slow to convert anyway.
    """
    if isinstance(X, pd.DataFrame) or hasattr(X, "tocsr") or hasattr(X, "__dataframe__"):
        return
    arr = np.asarray(X) if not isinstance(X, np.ndarray) else X
    if arr.ndim == 1 and name == "X":
        # scikit-learn's message (same wording) prints every value.
        raise ValueError(
            f"Expected 2D array, got 1D array instead (shape {arr.shape}). Reshape your data "
            "either using X.reshape(-1, 1) if it has a single feature or X.reshape(1, -1) "
            "if it is a single sample."
        )
    kind = arr.dtype.kind
    if kind == "c":
        raise ValueError(
            f"Complex data not supported: {name} contains complex numbers (dtype "
            f"{arr.dtype}); features must be real. "
            f"Pass {name}.real if the imaginary parts are all zero."
        )
    if kind in "USV":
        raise ValueError(
            f"{name} holds strings (dtype {arr.dtype}); features must be numbers. Encode "
            "text columns (for example with sklearn.preprocessing.OneHotEncoder), or "
            f"convert numeric text with {name}.astype(float)."
        )
    if kind == "O":
        for v in arr.flat:
            if isinstance(v, str):
                raise ValueError(
                    f"{name} (object dtype) holds strings such as {v!r}; features must be "
                    "numbers. Encode text columns (for example with "
                    "sklearn.preprocessing.OneHotEncoder)."
                )
            if isinstance(v, complex | np.complexfloating):
                raise ValueError(
                    f"{name} (object dtype) holds complex numbers such as {v!r}; features "
                    "must be real."
                )


def _check_finite(X):
    """Count and locate NaN and infinite features, in one line.

    scikit-learn's own check says the same over four lines; the row count
    and first position are what a user needs to find the bad cells.
    """
    finite = np.isfinite(X)
    if finite.all():
        return
    i, j = (int(v) for v in np.argwhere(~finite)[0])
    parts = []
    for what, mask in (("NaN", np.isnan(X)), ("infinity", np.isinf(X))):
        rows = int(mask.any(axis=1).sum())
        if rows:
            parts.append(f"{what} in {rows} row(s)")
    raise ValueError(
        f"Input X contains {' and '.join(parts)} (first at row {i}, column {j}). Drop or "
        "impute missing values (for example with sklearn.impute.SimpleImputer in a "
        "Pipeline) and replace infinite ones."
    )


def check_magnitude(X, per_column=True):
    """Reject NaN/inf and features whose squares overflow or underflow float64.

    Max and min reductions read X without any temporary of its size; NaN
    and infinity propagate through them, so the detailed scan of
    ``_check_finite`` runs only when something is wrong. ``per_column=False``
    (prediction) checks only the overall range, which is all a prediction
    needs and a third of the cost; the per-column test for columns too small
    to square runs at fit time.
    """
    if X.size == 0:
        return
    if X.flags.c_contiguous:
        colmin, colmax = column_range(X) if per_column else overall_range(X)
    else:
        axis = 0 if per_column else None
        colmax, colmin = np.max(X, axis=axis), np.min(X, axis=axis)
    if not (np.all(np.isfinite(colmax)) and np.all(np.isfinite(colmin))):
        _check_finite(X)
    colmax = np.maximum(np.abs(colmax), np.abs(colmin))
    if not per_column:
        if colmax <= MAX_ABS_FEATURE:
            return
        colmax = np.max(np.abs(X), axis=0)
    check_column_magnitudes(colmax, per_column)


def check_column_magnitudes(colmax, per_column=True):
    """Reject columns whose largest |x| (``colmax``) overflows or underflows float64 squares.

    ``per_column=False`` checks only the overflow (prediction).
    """
    big = colmax > MAX_ABS_FEATURE
    tiny = (colmax > 0) & (colmax < 1.0 / MAX_ABS_FEATURE) if per_column else np.zeros_like(big)
    if np.any(big) or np.any(tiny):
        j = int(np.flatnonzero(big | tiny)[0])
        raise ValueError(
            f"feature column {j} has values of magnitude {colmax[j]:.3g}, outside "
            f"[{1 / MAX_ABS_FEATURE:.0e}, {MAX_ABS_FEATURE:.0e}]: products of such "
            "features overflow or underflow float64. Rescale the features (for example "
            "with sklearn.preprocessing.StandardScaler)."
        )


def as_labels(y):
    """y as an array whose values keep their type, or a clear error.

    pandas nullable columns (boolean, Int64, Float64) would otherwise be
    turned into float64 by scikit-learn, so that booleans come back from
    ``predict`` as 0.0/1.0; missing labels (NaN, None, pd.NA) and mixed
    types get a message that says so instead of "Unknown label type".
    """
    if y is None:
        return y  # scikit-learn's "requires y to be passed" follows
    if isinstance(y, pd.Series | pd.Index | pd.api.extensions.ExtensionArray):
        n_missing = int(np.sum(pd.isna(y)))
        if n_missing:
            raise ValueError(
                f"y has {n_missing} missing label(s) (NaN, None or pd.NA); drop those rows "
                "or give them a label."
            )
        dtype = y.dtype
        numpy_dtype = getattr(dtype, "numpy_dtype", None)
        if isinstance(dtype, pd.api.extensions.ExtensionDtype) and numpy_dtype is not None:
            return y.to_numpy(dtype=numpy_dtype)
        return y
    arr = np.asarray(y)
    if arr.dtype.kind == "c":
        raise ValueError(
            f"Complex data not supported: y contains complex numbers (dtype {arr.dtype}); "
            "labels must be real."
        )
    if arr.dtype.kind in "fO":
        n_missing = int(np.sum(pd.isna(arr)))
        if n_missing:
            raise ValueError(
                f"y has {n_missing} missing label(s) (NaN, None or pd.NA); drop those rows "
                "or give them a label."
            )
    if arr.dtype.kind == "O":
        has_str = any(isinstance(v, str) for v in arr.flat)
        if has_str and not all(isinstance(v, str) for v in arr.flat):
            kinds = sorted({type(v).__name__ for v in arr.flat})
            raise ValueError(
                f"y mixes label types ({', '.join(kinds)}); use one type for every label, "
                "for example all strings."
            )
    return y


_DENSE_CODE_RANGE = 1 << 20  # integer labels spanning at most this use counting


def warn_label_variants(classes):
    """Warn, naming them, when string classes differ only by case or surrounding spaces.

    "yes", "Yes " and "YES" are most likely one answer typed three ways; a
    classifier fits them as three classes, which is worth saying (the table
    layer says the same of a target column).
    """
    groups = {}
    for label in classes:
        if isinstance(label, str):
            groups.setdefault(label.strip().casefold(), []).append(label)
    for variants in groups.values():
        if len(variants) > 1:
            named = ", ".join(repr(str(v)) for v in variants)
            warnings.warn(
                f"y has labels that differ only by case or surrounding spaces: {named}; "
                "they are fitted as different classes.",
                LabelVariantWarning,
                stacklevel=4,
            )


def encode_labels(y):
    """Sorted distinct labels and each row's code, as ``np.unique(y, return_inverse=True)``.

    Integer and boolean labels whose range is small (at most
    ``_DENSE_CODE_RANGE`` and 2 n) are counted instead of sorted: one
    ``bincount`` and one table lookup, O(n) rather than O(n log n). Other
    labels go to ``np.unique``.

    Parameters
    ----------
    y : ndarray of shape (n,)

    Returns
    -------
    classes : ndarray of shape (K,), dtype of ``y``
    codes : ndarray of shape (n,), int64, values in [0, K - 1]
    """
    if y.ndim == 1 and y.size and y.dtype.kind in "biu":
        yi = y.astype(np.int64, copy=False) if y.dtype.kind == "b" else y
        lo, hi = int(yi.min()), int(yi.max())
        span = hi - lo + 1
        if span <= min(_DENSE_CODE_RANGE, 2 * y.size):
            # In int64 before the subtraction: in a narrow dtype (int8 labels
            # -100 and 100) the offsets overflow. A new array: codes never alias y.
            offset = yi.astype(np.int64) - lo
            present = np.flatnonzero(np.bincount(offset, minlength=span))
            classes = (present + lo).astype(y.dtype)
            if len(present) == span:
                # Every value in [lo, hi] occurs (labels 0 .. K-1, say): the
                # offsets are the codes.
                return classes, offset
            table = np.full(span, -1, dtype=np.int64)
            table[present] = np.arange(len(present))
            return classes, table[offset]
    classes, codes = np.unique(y, return_inverse=True)
    return classes, codes.astype(np.int64).reshape(-1)


def row_weights(sample_weight, X):
    """Our own float64 copy of ``sample_weight`` for the rows of X (ones for None).

    Non-negative and finite, or a one-line error naming ``sample_weight``.
    """
    if sample_weight is None:
        return np.ones(X.shape[0])
    reject_unusable_array(sample_weight, "sample_weight")
    w = _check_sample_weight(sample_weight, X, dtype=np.float64, ensure_non_negative=True)
    w = np.array(w, dtype=np.float64)  # our own copy, whatever was passed
    if not np.all(np.isfinite(w)):
        raise ValueError("sample_weight contains NaN or infinity.")
    return w


def codes_in_classes(classes, y, n_rows):
    """Codes (int64) of the labels y among a fitted model's sorted ``classes``.

    A label the model was not fitted on, or a y of the wrong length, is a
    one-line error.
    """
    y = np.asarray(as_labels(y))
    if y.ndim != 1 or len(y) != n_rows:
        raise ValueError(
            f"y must be 1-D with one label per row of X ({n_rows}); got shape {y.shape}."
        )
    try:
        codes = np.clip(np.searchsorted(classes, y), 0, len(classes) - 1)
        known = classes[codes] == y
    except TypeError:  # labels that do not compare with the classes
        known = np.zeros(len(y), dtype=bool)
        codes = np.zeros(len(y), dtype=np.int64)
    if not np.all(known):
        bad = plain(y[~known][0])
        raise ValueError(f"y contains the label {bad!r}, which the model was not fitted on.")
    return codes.astype(np.int64)
