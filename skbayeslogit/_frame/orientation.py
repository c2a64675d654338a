"""Results of a binary model turned towards its positive class.

Estimators keep scikit-learn's class order (``classes_`` sorted), in which a
binary model's probability, interval and coefficients are those of
``classes_[1]``. When the positive class is ``classes_[0]``, the bounds of
its probability are one minus the other class's bounds, swapped, and its
log-odds coefficients are the negatives, their bounds swapped.
"""

import numpy as np


def positive_index(model, n_classes, positive=None):
    """Index of the positive class in ``classes_`` (binary; None for multiclass).

    ``positive`` if given (matched as a label, or by its text), else the
    model's own ``positive_index_``, else 1 (scikit-learn's convention).
    """
    if n_classes != 2:
        return None
    if positive is not None:
        classes = list(model.classes_)
        match = [k for k, c in enumerate(classes) if c == positive] or [
            k for k, c in enumerate(classes) if str(c) == str(positive)
        ]
        if len(match) != 1:
            raise ValueError(
                f"positive={positive!r} is not a class of the model "
                f"(classes: {', '.join(map(repr, classes))})."
            )
        return match[0]
    index = getattr(model, "positive_index_", None)
    return 1 if index is None else int(index)


def oriented_bounds(lower, upper, index):
    """Binary bounds of P(classes_[1]) turned into those of P(classes_[index])."""
    lower, upper = np.asarray(lower), np.asarray(upper)
    if index == 0 and lower.ndim == 1:
        return 1.0 - upper, 1.0 - lower
    return lower, upper


def probability_columns(P, bounds, classes, index):
    """``prob_<c>`` (with ``_lower`` / ``_upper`` when there are bounds) and ``predicted_label``.

    Parameters
    ----------
    P : ndarray (n, K)
    bounds : (lower, upper) or None
        Binary: shape (n,) each, already of the positive class.
    classes : ndarray (K,)
    index : int or None
        The positive class (binary), None for multiclass.

    Returns
    -------
    dict of column name -> ndarray
    """
    shown = [index] if index is not None else range(len(classes))
    new = {}
    for k in shown:
        name = f"prob_{classes[k]}"
        new[name] = P[:, k]
        if bounds is not None:
            lo, hi = (np.asarray(b) for b in bounds)
            new[f"{name}_lower"] = lo if lo.ndim == 1 else lo[:, k]
            new[f"{name}_upper"] = hi if hi.ndim == 1 else hi[:, k]
    new["predicted_label"] = np.asarray(classes)[np.argmax(P, axis=1)]
    return new


def oriented_coefficients(table, classes, index):
    """A binary coefficient table as log-odds of ``classes[index]``.

    Parameters
    ----------
    table : pandas.DataFrame
        Columns ``estimate``, ``lower``, ``upper`` (and their ``_original``
        twins) as far as present; ``sd`` and ``sign_prob`` do not change.
    classes : ndarray
    index : int or None

    Returns
    -------
    pandas.DataFrame
        A new table; ``attrs["positive_class"]`` names the class (binary).
    """
    out = table.copy()
    out.attrs = dict(table.attrs)
    if index is None:
        return out
    out.attrs["positive_class"] = classes[index]
    if index == 1:
        return out
    for suffix in ("", "_original"):
        if f"estimate{suffix}" in out.columns:
            out[f"estimate{suffix}"] = -table[f"estimate{suffix}"]
        if f"lower{suffix}" in out.columns:
            out[f"lower{suffix}"] = -table[f"upper{suffix}"]
            out[f"upper{suffix}"] = -table[f"lower{suffix}"]
    return out
