"""A classifier fitted on a table: column roles, encoding and estimator in one object.

:class:`FrameModel` is what ``df.bayeslogit.fit`` returns and what the
report saves. It decides the role of every column once
(:func:`~skbayeslogit._frame.roles.assign_roles`), encodes the features
with scikit-learn transformers (:func:`~skbayeslogit._frame.encoding.encode_frame`),
fits the estimator, and keeps both as one scikit-learn ``Pipeline``, so a
new table is encoded exactly as the training table was.
"""

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.pipeline import Pipeline
from sklearn.utils.metaestimators import available_if
from sklearn.utils.validation import check_is_fitted

from .._checks.inputs import check_level
from .columns import is_numeric_dtype, require_columns
from .encoding import count_unseen, encode_frame
from .errors import FrameInputError
from .orientation import probability_columns
from .posterior_view import FramePosterior, as_frame, final_has, labels_of
from .roles import assign_roles
from .rows import missing_policy, rows_used

# Fitted attributes of the final estimator that the model shows as its own
# (``estimator_`` is the standardised-scale fit inside StandardizedClassifier).
_PASSED_ON = frozenset(
    {
        "coef_", "intercept_", "posterior_mean_", "posterior_cov_", "prior_scale_",
        "log_evidence_", "n_iter_", "estimator_", "center_", "scale_", "flip_rate_",
    }
)  # fmt: skip


def default_positive(col):
    """The second of two classes in scikit-learn's (sorted) order, or None."""
    labels = pd.unique(col.dropna())
    if len(labels) != 2:
        return None
    try:
        return sorted(labels)[-1]
    except TypeError:
        return sorted(labels, key=str)[-1]


class FrameModel(FramePosterior, ClassifierMixin, BaseEstimator):
    """Column roles, encoding and a classifier, fitted on one table.

    Fit it on a DataFrame that holds the target column; predict from any
    DataFrame that holds the feature columns (extra columns, any order).

    Parameters
    ----------
    estimator : classifier
        Unfitted; cloned, never fitted in place.
    target : str
        The label column.
    features, exclude, id : str or list of str, optional
        As in :func:`~skbayeslogit._frame.roles.assign_roles`. ID columns
        are never features.
    positive : label, optional
        Positive class of a binary target. Default: the second class in
        sorted order (scikit-learn's ``classes_[1]``).
    weight : str, optional
        Column of frequency weights (an integer weight equals repeating
        the row).
    missing : {"error", "drop", "impute"}, default="error"
        Missing cells in fitting and prediction: an error counting them,
        rows left out (fitting only; in prediction they are an error), or
        median / most frequent level imputed by the encoder.
    max_levels : int, default=20
        Text columns with more distinct values are left out.
    standardize : bool, default=True
        Fit through :class:`~skbayeslogit.standardized.StandardizedClassifier`
        on standardised encoded columns (the prior acts per standard
        deviation); coefficients are reported on both scales.

    Attributes
    ----------
    pipeline_ : sklearn.pipeline.Pipeline
        ``("encode", ColumnTransformer)`` then ``("classify", estimator)``;
        takes a DataFrame of the feature columns.
    classes_ : ndarray
        The estimator's classes, in scikit-learn's (sorted) order.
    positive_ : label or None
        Binary: the positive class; None for multiclass.
    positive_index_ : int or None
        Position of ``positive_`` in ``classes_``.
    target_name_ : str
    feature_names_in_ : ndarray of str
        The original feature columns (numeric, then categorical).
    feature_names_out_ : ndarray of str
        The encoded columns the estimator sees (``column=level`` for levels).
    numeric_columns_, categorical_columns_, id_columns_ : list of str
    weight_column_ : str or None
    groups_ : dict of str to list of str
        Original column -> its encoded columns.
    reference_levels_ : dict
        Categorical column -> level without a coefficient (no prior only).
    columns_ : pandas.DataFrame
        One row per input column: column, role, kind, reason, missing,
        distinct (``columns.csv``); built from ``column_roles_`` (the same
        table as a dict of lists, which is what is stored).
    statements_ : list of str
        Every decision taken without being told.
    rows_dropped_ : int
    imputed_ : dict
        Column -> cells imputed in fitting.
    n_features_in_ : int

    Notes
    -----
    Attributes are plain Python, numpy, pandas and scikit-learn objects
    (for saving with skops). ``coef_``, ``posterior_mean_``, ``prior_scale_``
    and the final estimator's other fitted attributes are read through.
    """

    def __init__(
        self,
        estimator,
        target,
        *,
        features=None,
        positive=None,
        weight=None,
        id=None,
        exclude=None,
        missing="error",
        max_levels=20,
        standardize=True,
    ):
        self.estimator = estimator
        self.target = target
        self.features = features
        self.positive = positive
        self.weight = weight
        self.id = id
        self.exclude = exclude
        self.missing = missing
        self.max_levels = max_levels
        self.standardize = standardize

    @property
    def columns_(self):
        """The role of every input column, one row each (see the class docstring)."""
        check_is_fitted(self, "pipeline_")
        return pd.DataFrame(self.column_roles_)

    def __getattr__(self, name):
        if name in _PASSED_ON and "pipeline_" in self.__dict__:
            return getattr(self.__dict__["pipeline_"][-1], name)
        raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")

    # -- fitting -----------------------------------------------------------------
    def fit(self, X, y=None, sample_weight=None):
        """Decide the column roles, encode, fit the estimator.

        Parameters
        ----------
        X : pandas.DataFrame
            The table, with the target column; never modified.
        y, sample_weight : None
            Labels and weights come from the table (``target``, ``weight``).

        Returns
        -------
        self
        """
        if y is not None or sample_weight is not None:
            raise TypeError("FrameModel takes labels and weights from the table's columns.")
        df = as_frame(X)
        policy = missing_policy(self.missing)
        roles = self.decide_roles(df)
        _check_numbers(df, roles.numeric)
        keep = rows_used(df, roles.features, self.target, policy)
        used = df if keep.all() else df.loc[keep]
        prior = _prior_scale(self.estimator)
        enc = encode_frame(
            used, roles, missing="impute" if policy == "impute" else "error", prior_scale=prior
        )
        final = clone(self.estimator)
        if self.standardize:
            from ..standardized import StandardizedClassifier

            final = StandardizedClassifier(final)
        labels = labels_of(used[self.target])
        if enc.sample_weight is None:
            final.fit(enc.X, labels)
        else:
            final.fit(enc.X, labels, sample_weight=enc.sample_weight)
        self.pipeline_ = Pipeline([("encode", enc.encoder), ("classify", final)])
        self._record(roles, enc, final, int((~keep).sum()))
        return self

    def decide_roles(self, df):
        """The role of every column of ``df`` under this model's options.

        Parameters
        ----------
        df : pandas.DataFrame

        Returns
        -------
        ColumnRoles
            See :func:`~skbayeslogit._frame.roles.assign_roles`.
        """
        require_columns(df, [self.target])
        if len(df) == 0:
            raise FrameInputError("no rows to fit: the frame has 0 rows.")
        classes = pd.unique(df[self.target].dropna())
        if len(classes) < 2:
            shown = f" ({classes[0]!r})" if len(classes) else ""
            raise FrameInputError(
                f"the target {self.target!r} has only one class{shown} among its "
                "non-missing values; a classifier needs at least two classes."
            )
        positive = self.positive
        if positive is None:
            positive = default_positive(df[self.target])
        roles = assign_roles(
            df, self.target, features=self.features, exclude=self.exclude, id=self.id,
            weight=self.weight, positive=positive, max_levels=self.max_levels,
        )  # fmt: skip
        if self.features is not None:
            # The caller's order, not the table's.
            order = [self.features] if isinstance(self.features, str) else list(self.features)
            roles.numeric = [c for c in order if c in roles.numeric]
            roles.categorical = [c for c in order if c in roles.categorical]
        if self.positive is None and roles.positive is not None:
            roles.statements = [
                s if not s.startswith("positive class") else
                f"positive class of {self.target!r}: {roles.positive!r} (the second class in "
                "sorted order; pass positive= to choose)"
                for s in roles.statements
            ]  # fmt: skip
        return roles

    def _record(self, roles, enc, final, dropped):
        self.classes_ = np.asarray(final.classes_)
        self.positive_ = roles.positive
        self.positive_index_ = None
        if roles.positive is not None:
            self.positive_index_ = int(np.flatnonzero(self.classes_ == roles.positive)[0])
        self.target_name_ = roles.target
        self.numeric_columns_ = list(roles.numeric)
        self.categorical_columns_ = list(roles.categorical)
        self.feature_names_in_ = np.array(roles.features, dtype=object)
        self.feature_names_out_ = np.array(enc.X.columns, dtype=object)
        self.n_features_in_ = len(roles.features)
        self.id_columns_ = list(roles.ids)
        self.weight_column_ = roles.weight
        self.groups_ = {str(k): list(v) for k, v in enc.groups.items()}
        self.reference_levels_ = dict(enc.reference_levels)
        # Plain lists, not a DataFrame: model files (skops) cannot hold pandas.
        self.column_roles_ = {c: roles.table[c].tolist() for c in roles.table.columns}
        self.statements_ = list(roles.statements) + list(enc.statements)
        self.rows_dropped_ = dropped
        self.imputed_ = dict(enc.imputed)

    # -- encoding ------------------------------------------------------------------
    def transform(self, X):
        """The encoded design of the rows of ``X`` (what the estimator sees).

        Parameters
        ----------
        X : pandas.DataFrame
            Holds the feature columns. A missing cell is an error unless the
            model imputes (``missing="impute"``).

        Returns
        -------
        pandas.DataFrame of float64, columns ``feature_names_out_``
        """
        check_is_fitted(self, "pipeline_")
        df = as_frame(X)
        feats = list(self.feature_names_in_)
        require_columns(df, feats)
        policy = "impute" if self.missing == "impute" else "error"
        rows_used(df, feats, None, policy)
        _check_numbers(df, self.numeric_columns_)
        Z = np.ascontiguousarray(self.pipeline_[0].transform(df[feats]), dtype=np.float64)
        return pd.DataFrame(Z, columns=list(self.feature_names_out_), index=df.index)

    def unseen_levels(self, X):
        """Cells of each categorical column whose level was not seen in fitting.

        Such cells are encoded as "no level" (all zeros), not an error.

        Returns
        -------
        dict
            Column -> count, only the columns with any.
        """
        check_is_fitted(self, "pipeline_")
        return count_unseen(self.pipeline_[0], as_frame(X))

    # -- prediction ------------------------------------------------------------------
    def predict_proba(self, X):
        """Class probabilities, shape (n, n_classes), columns in ``classes_`` order."""
        return self.pipeline_[-1].predict_proba(self.transform(X))

    def predict(self, X):
        """The most probable class of each row."""
        return self.pipeline_[-1].predict(self.transform(X))

    @available_if(final_has("decision_function"))
    def decision_function(self, X):
        """The estimator's decision function on the encoded rows."""
        return self.pipeline_[-1].decision_function(self.transform(X))

    def probability_table(self, X, level=0.9):
        """Probabilities, credible bounds and the predicted label of each row.

        Parameters
        ----------
        X : pandas.DataFrame
        level : float in (0, 1)

        Returns
        -------
        pandas.DataFrame
            Indexed as ``X``. Binary: ``prob_<positive>``, ``prob_<positive>_lower``,
            ``prob_<positive>_upper``; multiclass: the three for every class;
            the bounds only for estimators with ``predict_interval``; then
            ``predicted_label``. ``attrs["unseen_levels"]`` counts the cells
            with a level not seen in fitting.
        """
        level = check_level(level)
        df = as_frame(X)
        P = self.predict_proba(df)
        bounds = None
        if hasattr(self, "predict_interval"):
            bounds = self.predict_interval(df, level=level)
        out = pd.DataFrame(
            probability_columns(P, bounds, self.classes_, self.positive_index_), index=df.index
        )
        out.attrs = {"level": level, "unseen_levels": self.unseen_levels(df)}
        return out


def _prior_scale(estimator):
    """The estimator's ``prior_scale`` parameter (also inside a wrapper); 1.0 if none."""
    params = estimator.get_params()
    found = [v for k, v in params.items() if k == "prior_scale" or k.endswith("__prior_scale")]
    return found[0] if found else 1.0


def _check_numbers(df, numeric):
    """One-line errors for complex or infinite values in numeric feature columns."""
    if not numeric:
        return
    text = [c for c in numeric if not is_numeric_dtype(df[c].dtype)]
    if text:
        kinds = ", ".join(f"{c} ({df[c].dtype})" for c in text)
        raise FrameInputError(
            f"non-numeric feature column(s): {kinds}; the model was fitted on numbers there."
        )
    complex_cols = [c for c in numeric if pd.api.types.is_complex_dtype(df[c].dtype)]
    if complex_cols:
        kinds = ", ".join(f"{c} ({df[c].dtype})" for c in complex_cols)
        raise FrameInputError(
            f"feature column(s) of complex numbers: {kinds}; a classifier needs real numbers."
        )
    values = df[numeric].to_numpy(dtype=np.float64, na_value=np.nan)
    bad = [c for j, c in enumerate(numeric) if np.isinf(values[:, j]).any()]
    if bad:
        raise FrameInputError(
            f"feature column(s) with infinite values: {', '.join(bad)}; replace them first."
        )
