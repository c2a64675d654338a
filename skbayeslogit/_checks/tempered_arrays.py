"""Checks of the arrays and scalars handed to the public tempered functions.

Each returns the value converted to what the kernels take (C-contiguous,
writeable float64 and int64: each other dtype or layout would be a new numba
compilation) or raises a one-line error naming the argument.  The fit does
not come here: it converts its labels once and calls the kernels directly.
"""

import numpy as np

T_MAX = 10.0
# Probability rows are accepted when they sum to one within this (float32
# round-off of a normalised row is ~1e-7; anything larger is a different
# measure, not a rounding error).
LABEL_SUM_ATOL = 1e-6


def check_scalar(name, value, low, high):
    if isinstance(value, bool | np.bool_):
        raise TypeError(f"{name} must be a real number, got {value!r}")
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a real number, got {value!r}") from None
    if not (low <= v <= high):
        raise ValueError(f"{name} must be in [{low:g}, {high:g}], got {value!r}")
    return v


def as_float_c(x):
    # One dtype/layout/writeable combination for every call: each different
    # one would be a new numba compilation.
    return np.require(x, dtype=np.float64, requirements=["C", "A", "W"])


def check_finite(name, x):
    if not np.isfinite(x).all():
        if np.isnan(x).any():
            raise ValueError(f"{name} contain NaN")
        raise ValueError(f"{name} contain infinite values")


def as_activations(activations):
    a = np.asarray(activations)
    if a.dtype.kind not in "biuf":
        raise TypeError(f"activations must be real numbers, got dtype {a.dtype}")
    if a.ndim not in (1, 2):
        raise ValueError(f"activations must be 1-D (one row) or 2-D (n, K), got {a.ndim}-D")
    one_row = a.ndim == 1
    a = as_float_c(a.reshape(1, -1) if one_row else a)
    if a.shape[1] == 0:
        raise ValueError("activations need at least one class (K >= 1)")
    check_finite("activations", a)
    return a, one_row


def as_labels(labels, n, k, one_row):
    """Return (index labels (n,) int64 or None, probability rows (n, K) or None)."""
    y = np.asarray(labels)
    if y.dtype.kind not in "biuf":
        raise TypeError(f"labels must be numbers, got dtype {y.dtype}")
    index_ndim = 0 if one_row else 1
    if y.ndim == index_ndim:
        y = y.reshape(-1)
        if y.shape[0] != n:
            raise ValueError(f"labels has {y.shape[0]} rows, activations {n}")
        if y.dtype.kind == "f":
            check_finite("labels", y)
            if np.any(y != np.round(y)):
                raise ValueError("class-index labels must be whole numbers")
        if n and (y.min() < 0 or y.max() >= k):
            raise ValueError(
                f"class-index labels must be in [0, {k - 1}], got values in [{y.min()}, {y.max()}]"
            )
        return np.require(y, dtype=np.int64, requirements=["C", "A", "W"]), None
    if y.ndim == index_ndim + 1:
        y = as_float_c(y.reshape(1, -1) if one_row else y)
        if y.shape != (n, k):
            raise ValueError(f"probability labels must have shape {(n, k)}, got {y.shape}")
        check_finite("labels", y)
        if np.any(y < 0):
            raise ValueError("probability labels must be >= 0")
        if n and np.max(np.abs(y.sum(axis=1) - 1.0)) > LABEL_SUM_ATOL:
            raise ValueError(f"probability label rows must sum to 1 (within {LABEL_SUM_ATOL:g})")
        return None, y
    raise ValueError(
        "labels must be class indices, shape (n,), or probability rows, shape "
        f"(n, K); got shape {y.shape} for activations with {n} rows and {k} classes"
    )
