"""The preprocessing as one scikit-learn object, built from the column roles.

:func:`make_encoder` returns a ``ColumnTransformer``: numeric columns pass
through (or are imputed with their median under ``missing="impute"``);
categorical columns go through :class:`~skbayeslogit._frame.levels.CategoricalEncoder`
(text levels to codes, ``SimpleImputer(strategy="most_frequent")`` under
``missing="impute"``, ``OneHotEncoder``), with output names ``column=level``.
Rare levels can be pooled into ``column=(rare levels)`` (``max_categories``,
``min_frequency``).

With a prior (``prior_scale`` not None) every level keeps a coefficient: the
prior identifies them. Without one (maximum likelihood) the levels of a
column sum to the intercept's column, so the most frequent level is dropped
as the reference and its effect is carried by the intercept (treatment
coding); the statements say which level.

:func:`encode_frame` applies the missing-value policy to the rows, fits the
encoder and returns an :class:`EncodedDesign` with the design, the target
codes, the weights, the columns each original column became
(``groups``, for per-column evidence) and what was dropped or imputed.
"""

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.compose import ColumnTransformer
from sklearn.impute import SimpleImputer

from .errors import FrameInputError
from .levels import CategoricalEncoder

MISSING_POLICIES = ("error", "drop", "impute")


def make_encoder(
    numeric,
    categorical,
    *,
    missing="error",
    reference=None,
    max_categories=None,
    min_frequency=None,
    handle_unknown="infrequent_if_exist",
):
    """An unfitted ``ColumnTransformer`` for these columns.

    Parameters
    ----------
    numeric, categorical : list of str
    missing : {"error", "drop", "impute"}
        Only "impute" adds imputers (median for numeric, most frequent
        level for categorical columns).
    reference : dict, optional
        Categorical column -> level to drop (as text). None keeps every level.
    max_categories, min_frequency : optional
        Passed to ``OneHotEncoder`` to pool rare levels.
    handle_unknown : {"infrequent_if_exist", "ignore"}
        Levels unseen in fitting map to the pooled rare level if there is
        one, else to all zeros (count them with :func:`count_unseen`).

    Returns
    -------
    sklearn.compose.ColumnTransformer
    """
    _check_policy(missing)
    impute = missing == "impute"
    cat = CategoricalEncoder(
        impute=impute,
        reference=reference,
        handle_unknown=handle_unknown,
        max_categories=max_categories,
        min_frequency=min_frequency,
    )
    num = SimpleImputer(strategy="median") if impute else "passthrough"
    parts = [("numeric", num, list(numeric))]
    if categorical:
        parts.append(("categorical", cat, list(categorical)))
    return ColumnTransformer(parts, verbose_feature_names_out=False, sparse_threshold=0.0)


def _check_policy(missing):
    if missing not in MISSING_POLICIES:
        raise FrameInputError(
            f"missing must be one of {', '.join(map(repr, MISSING_POLICIES))}; got {missing!r}."
        )


def column_groups(encoder):
    """Which output columns each original column became.

    Parameters
    ----------
    encoder : fitted ColumnTransformer from :func:`make_encoder`

    Returns
    -------
    dict
        Original column -> list of output names, in output order.
    """
    groups = {}
    for name, _, cols in encoder.transformers_:
        if name == "numeric":
            groups.update({c: [c] for c in cols})
        elif name == "categorical":
            groups.update(encoder.named_transformers_["categorical"].output_groups())
    return groups


def count_unseen(encoder, df):
    """Cells of each categorical column whose level the encoder was not fitted on.

    Parameters
    ----------
    encoder : fitted ColumnTransformer from :func:`make_encoder`
    df : pandas.DataFrame
        Rows to score (missing cells are not counted as unseen).

    Returns
    -------
    dict
        Categorical column -> number of cells with an unseen level (only
        columns with at least one).
    """
    if "categorical" not in encoder.named_transformers_:
        return {}
    cols = next(cols for name, _, cols in encoder.transformers_ if name == "categorical")
    return encoder.named_transformers_["categorical"].unseen_counts(df[cols])


@dataclass
class EncodedDesign:
    """A fitted encoder and the design it made from the training table.

    Attributes
    ----------
    X : pandas.DataFrame of float64, shape (n_used, p)
        Columns named as the encoder's output (``column=level``); the index
        is the input rows used.
    y : ndarray of int64, shape (n_used,)
        Codes into ``classes`` (binary: 1 is the positive class).
    classes : tuple
    sample_weight : ndarray of float64 or None
    rows : ndarray of bool, shape (n_rows,)
        The input rows used.
    encoder : sklearn.compose.ColumnTransformer, fitted
    groups : dict
        Original column -> its output columns.
    reference_levels : dict
        Categorical column -> the level dropped as reference (no prior only).
    dropped_rows : int
    imputed : dict
        Column -> cells imputed (``missing="impute"``).
    statements : list of str
    """

    X: pd.DataFrame
    y: np.ndarray
    classes: tuple
    sample_weight: np.ndarray | None
    rows: np.ndarray
    encoder: ColumnTransformer
    groups: dict
    reference_levels: dict = field(default_factory=dict)
    dropped_rows: int = 0
    imputed: dict = field(default_factory=dict)
    statements: list = field(default_factory=list)

    def transform(self, df):
        """The design of new rows and the count of unseen levels.

        Parameters
        ----------
        df : pandas.DataFrame
            Must hold the feature columns; not modified.

        Returns
        -------
        X : pandas.DataFrame of float64
        unseen : dict
            See :func:`count_unseen`.
        """
        return _design(self.encoder, df), count_unseen(self.encoder, df)


def _design(encoder, df):
    Z = np.ascontiguousarray(encoder.transform(df), dtype=np.float64)
    return _frame_of(Z, encoder, df.index)


def _frame_of(Z, encoder, index):
    # Z is a fresh C-contiguous array: wrapping it without a copy keeps
    # ``X.to_numpy()`` C-contiguous too, which is what the estimators use.
    return pd.DataFrame(Z, columns=list(encoder.get_feature_names_out()), index=index, copy=False)


def encode_frame(
    df,
    roles,
    *,
    missing="error",
    prior_scale=1.0,
    max_categories=None,
    min_frequency=None,
    handle_unknown="infrequent_if_exist",
):
    """Apply the missing-value policy, fit the encoder and build the design.

    Parameters
    ----------
    df : pandas.DataFrame
        Not modified.
    roles : ColumnRoles
        From :func:`skbayeslogit._frame.roles.assign_roles` on ``df``.
    missing : {"error", "drop", "impute"}
        "error": one line naming the columns with missing cells and their
        counts. "drop": rows with a missing feature or target are left out
        (counted). "impute": rows without a target are left out, missing
        feature cells are imputed inside the encoder (counted).
    prior_scale : float, "auto" or None
        Only whether it is None matters here: None drops each categorical
        column's most frequent level as the reference.
    max_categories, min_frequency, handle_unknown
        See :func:`make_encoder`.

    Returns
    -------
    EncodedDesign
    """
    _check_policy(missing)
    feats = roles.features
    codes = roles.target_codes(df)
    statements = []
    rows, imputed = _apply_policy(df, roles, codes, missing, statements)
    dropped = int((~rows).sum())
    used = df.loc[rows] if dropped else df
    reference = None
    if prior_scale is None:
        reference = _reference_levels(used, roles.categorical, statements)
    encoder = make_encoder(
        roles.numeric,
        roles.categorical,
        missing=missing,
        reference=reference,
        max_categories=max_categories,
        min_frequency=min_frequency,
        handle_unknown=handle_unknown,
    )
    Z = np.ascontiguousarray(encoder.fit_transform(used[feats]), dtype=np.float64)
    weight = None
    if roles.weight is not None:
        weight = used[roles.weight].to_numpy(dtype=np.float64).copy()
    return EncodedDesign(
        X=_frame_of(Z, encoder, used.index),
        y=codes[rows],
        classes=roles.classes,
        sample_weight=weight,
        rows=rows,
        encoder=encoder,
        groups=column_groups(encoder),
        reference_levels=reference or {},
        dropped_rows=dropped,
        imputed=imputed,
        statements=statements,
    )


def _apply_policy(df, roles, codes, missing, statements):
    """Rows used and cells to impute under the missing-value policy."""
    miss = df[roles.features].isna()
    per_col = miss.sum()
    n_target_missing = int((codes < 0).sum())
    if missing == "error" and (per_col.any() or n_target_missing):
        counts = [f"{c}: {int(k)}" for c, k in per_col.items() if k]
        counts += [f"{roles.target} (target): {n_target_missing}"] if n_target_missing else []
        raise FrameInputError(
            f"missing values in {', '.join(counts)}; pass missing='drop' to leave those rows "
            "out or missing='impute' to fill them."
        )
    rows = codes >= 0
    if missing == "drop":
        rows &= ~miss.any(axis=1).to_numpy()
    dropped = int((~rows).sum())
    if dropped:
        why = "a missing target" if missing == "impute" else "missing values"
        statements.append(f"{dropped} of {len(df)} rows left out for {why}")
    imputed = {}
    if missing == "impute":
        imputed = {c: int(k) for c, k in miss.loc[rows].sum().items() if k}
    if imputed:
        counts = ", ".join(f"{c}: {k}" for c, k in imputed.items())
        statements.append(f"imputed cells (median or most frequent level): {counts}")
    return rows, imputed


def _reference_levels(used, categorical, statements):
    """The most frequent level of each categorical column (ties: first in sort order)."""
    reference = {}
    for c in categorical:
        codes, uniques = pd.factorize(used[c])
        counts = pd.Series(np.bincount(codes[codes >= 0], minlength=len(uniques)))
        counts.index = [str(u) for u in uniques]
        counts = counts.groupby(level=0).sum()
        top = counts.max()
        reference[c] = sorted(counts.index[counts == top])[0]
        statements.append(
            f"{c!r}: reference level {reference[c]!r} (the most frequent, {int(top)} rows) "
            "has no coefficient; with prior_scale=None the intercept carries it"
        )
    return reference
