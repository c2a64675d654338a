"""Which rows of a frame a model uses, under the missing-value policy.

The policy is one of ``"error"`` (a missing cell in a used column is an
error that counts them per column), ``"drop"`` (those rows are left out,
with a :class:`~skbayeslogit._frame.columns.DroppedRowsWarning`) or
``"impute"`` (feature cells are filled inside the encoder; only rows
without a target are left out). The old ``dropna=True`` means ``"drop"``.
"""

import warnings

import numpy as np

from .columns import DroppedRowsWarning, MissingValues
from .encoding import MISSING_POLICIES
from .errors import FrameInputError


def missing_policy(missing, dropna=False):
    """The policy from ``missing`` and the older ``dropna`` flag (True means "drop").

    Parameters
    ----------
    missing : {"error", "drop", "impute"} or None
        None or "error" with ``dropna``: "drop".
    dropna : bool

    Returns
    -------
    str
    """
    if missing is None:
        return "drop" if dropna else "error"
    if missing not in MISSING_POLICIES:
        raise FrameInputError(
            f"missing must be one of {', '.join(map(repr, MISSING_POLICIES))}; got {missing!r}."
        )
    if dropna and missing == "error":
        return "drop"
    if dropna and missing != "drop":
        raise FrameInputError(
            f"dropna=True means missing='drop'; it contradicts missing={missing!r}."
        )
    return missing


def rows_used(df, features, target, policy, *, warn=True, stacklevel=2):
    """Rows of ``df`` that a model fits or scores under ``policy``.

    Parameters
    ----------
    df : pandas.DataFrame
    features : list of str
    target : str or None
        None when scoring without labels.
    policy : {"error", "drop", "impute"}
    warn : bool
        Emit the DroppedRowsWarning for left-out rows.
    stacklevel : int
        Of the warning, counted from the caller of this function.

    Returns
    -------
    ndarray of bool, shape (n_rows,)
    """
    checked = [] if policy == "impute" else list(features)
    checked += [] if target is None else [target]
    if not checked:
        return np.ones(len(df), dtype=bool)
    missing = MissingValues.of(df, checked)
    n_missing = missing.n_rows
    if n_missing and policy == "error":
        raise FrameInputError(
            f"{n_missing} of {len(df)} rows have missing values (per column: "
            f"{missing.listing()}). Drop or impute them first, or pass missing='drop' "
            "(dropna=True) to leave those rows out or missing='impute' to fill them."
        )
    if n_missing and warn:
        warnings.warn(
            f"dropped {n_missing} of {len(df)} rows with missing values "
            f"(per column: {missing.listing()}).",
            DroppedRowsWarning,
            stacklevel=stacklevel + 1,
        )
    return ~missing.rows
