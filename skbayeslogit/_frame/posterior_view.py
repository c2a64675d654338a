"""What a fitted FrameModel says about its posterior, turned to its positive class.

:class:`FramePosterior` is the part of
:class:`~skbayeslogit._frame.model.FrameModel` that reads the final
estimator's posterior: credible bounds, latent moments, label doubt,
draws, the coefficient table (``column=level`` names, both scales) and the
Bayes factor of every original column. A method is present only when the
final estimator has it.
"""

import inspect

import numpy as np
import pandas as pd
from sklearn.utils.metaestimators import available_if
from sklearn.utils.validation import check_is_fitted

from .._approximation import DEFAULT_CHECK_DRAWS
from .._checks.inputs import check_level
from .orientation import oriented_bounds, oriented_coefficients
from .rows import missing_policy, rows_used


def final_has(name):
    """available_if check: the final estimator (fitted, or the unfitted one) has ``name``."""

    def check(self):
        final = self.pipeline_[-1] if hasattr(self, "pipeline_") else self.estimator
        return hasattr(final, name)

    return check


def as_frame(X):
    """``X`` itself when it is a DataFrame; a TypeError otherwise."""
    if not isinstance(X, pd.DataFrame):
        raise TypeError(
            f"a FrameModel reads columns by name: pass a pandas DataFrame, not {type(X).__name__}."
        )
    return X


def labels_of(col):
    """The label column as an array: object for text and categories, else its own dtype."""
    is_text = pd.api.types.is_string_dtype(col.dtype) or isinstance(col.dtype, pd.CategoricalDtype)
    return np.asarray(col.to_numpy(dtype=object) if is_text else col.to_numpy())


class FramePosterior:
    """Posterior methods of a FrameModel (a mixin: needs ``pipeline_``, ``transform``)."""

    @available_if(final_has("predict_interval"))
    def predict_interval(self, X, level=0.9):
        """Credible bounds of the class probabilities.

        Returns
        -------
        lower, upper : ndarray
            Binary: shape (n,), bounds of P(``positive_`` | x). Multiclass:
            shape (n, K), columns in ``classes_`` order.
        """
        lower, upper = self.pipeline_[-1].predict_interval(self.transform(X), level=level)
        return oriented_bounds(lower, upper, self.positive_index_)

    @available_if(final_has("logit_moments"))
    def logit_moments(self, X):
        """Posterior mean and variance of the latent linear predictor.

        Binary: of the log-odds (or probit index) of ``positive_``.
        """
        mean, var = self.pipeline_[-1].logit_moments(self.transform(X))
        if self.positive_index_ == 0:
            mean = -np.asarray(mean)
        return mean, var

    @available_if(final_has("label_doubt"))
    def label_doubt(self, X, y):
        """The estimator's per-row doubt about the recorded labels ``y``."""
        return self.pipeline_[-1].label_doubt(self.transform(X), y)

    @available_if(final_has("flip_probability"))
    def flip_probability(self, X, y):
        """Posterior probability that each recorded label ``y`` was flipped (label-flip model)."""
        return self.pipeline_[-1].flip_probability(self.transform(X), y)

    @available_if(final_has("predict_recorded_proba"))
    def predict_recorded_proba(self, X):
        """Probabilities of the label as recorded, flips included (label-flip model)."""
        return self.pipeline_[-1].predict_recorded_proba(self.transform(X))

    @available_if(final_has("sample_coef"))
    def sample_coef(self, n, random_state=None):
        """Posterior draws, columns in the order of ``feature_names_out_`` then intercept(s).

        Binary draws are of the log-odds of ``classes_[1]``, as ``coef_``.
        """
        return self.pipeline_[-1].sample_coef(n, random_state=random_state)

    # -- the posterior -----------------------------------------------------------------
    @available_if(final_has("coef_table"))
    def coef_table(self, level=0.9, scale="both"):
        """Coefficients of the encoded columns (``column=level``), on the chosen scale(s).

        Binary: of the log-odds of ``positive_`` (signs and bounds flipped
        when it is ``classes_[0]``). Only for an estimator with a posterior;
        :func:`coefficient_table` gives the estimates of any linear one.

        Parameters
        ----------
        level : float in (0, 1)
        scale : {"both", "standardized", "original"}, default="both"
            As in :meth:`StandardizedClassifier.coef_table`; a model fitted
            with ``standardize=False`` has the original scale only.

        Returns
        -------
        pandas.DataFrame
            See :meth:`StandardizedClassifier.coef_table`;
            ``attrs["positive_class"]`` names the class (binary).
        """
        check_is_fitted(self, "pipeline_")
        final = self.pipeline_[-1]
        if "scale" in inspect.signature(final.coef_table).parameters:
            table = final.coef_table(check_level(level), scale=scale)
        elif scale in ("both", "original"):
            table = final.coef_table(check_level(level))
        else:
            raise ValueError(
                f"scale={scale!r}: this model was fitted with standardize=False and has "
                "coefficients on the original scale only."
            )
        return oriented_coefficients(table, self.classes_, self.positive_index_)

    @available_if(final_has("column_evidence"))
    def column_evidence(self, X=None):
        """Bayes factor of "no effect" per ORIGINAL column (levels grouped).

        Parameters
        ----------
        X : pandas.DataFrame, optional
            None: the closed-form Savage-Dickey ratio of the fitted posterior.
            A table (with the target, and the weight column if any): the
            ratio of Laplace evidences refitted on its rows, one fit per
            column.

        Returns
        -------
        pandas.DataFrame
            Indexed by original column: ``n_parameters``,
            ``log10_bf_no_effect`` (positive favours no effect),
            ``evidence``, ``method``.
        """
        check_is_fitted(self, "pipeline_")
        final = self.pipeline_[-1]
        if X is None:
            return final.column_evidence(self.groups_)
        used, y, w = self._fitted_rows(X, stacklevel=4)
        return final.column_evidence(self.groups_, self.transform(used), y, w)

    @available_if(final_has("check_approximation"))
    def check_approximation(self, X, n_draws=DEFAULT_CHECK_DRAWS, random_state=None, refine=False):
        """How far the Laplace posterior is from the exact one on the rows of a table.

        Parameters
        ----------
        X : pandas.DataFrame
            The table the model was fitted on: the feature columns, the
            target and the weight column if any (rows left out as in
            fitting, by ``missing``).
        n_draws, random_state, refine :
            As in the estimator's ``check_approximation``.

        Returns
        -------
        ApproximationCheck
            The final estimator's check on the encoded columns; a
            standardised model's ``coef_table`` is on the standardised
            scale, binary tables are of the log-odds of ``classes_[1]``
            (:func:`~skbayeslogit._frame.approximation.approximation_verdict`
            turns them to ``positive_``). Its ``predict_proba`` and
            ``predict_interval`` take tables, as this model's do.
        """
        check_is_fitted(self, "pipeline_")
        used, y, w = self._fitted_rows(X, stacklevel=3)
        options = {"n_draws": n_draws, "random_state": random_state, "refine": refine}
        return check_on_rows(self, used, y, w, options)

    def _fitted_rows(self, X, stacklevel):
        """The rows of table X that fitting would use, their labels and weights."""
        df = as_frame(X)
        policy = missing_policy(self.missing)
        feats = list(self.feature_names_in_)
        keep = rows_used(df, feats, self.target, policy, stacklevel=stacklevel)
        used = df if keep.all() else df.loc[keep]
        return used, labels_of(used[self.target]), self.row_weights(used)

    def row_weights(self, rows):
        """The frequency weights of ``rows`` (a table) from the weight column, or None."""
        column = getattr(self, "weight_column_", None)
        return None if column is None else rows[column].to_numpy(float)


def laplace_estimator(model, X):
    """The estimator with the Laplace posterior, and ``X`` as that estimator takes it.

    A FrameModel hands on its final estimator and the encoded columns of
    table ``X``; a standardised final estimator standardises them itself
    (its ``check_approximation`` checks its wrapped estimator). A TypeError
    when the model has no Laplace posterior.
    """
    if hasattr(model, "pipeline_"):
        # A FrameModel: its final estimator saw the encoded columns.
        model, X = model.pipeline_[-1], model.transform(X)
    if hasattr(model, "check_approximation"):
        return model, X
    name = type(getattr(model, "estimator_", model)).__name__
    raise TypeError(
        "check_approximation needs a model with a Laplace posterior ('laplace' or "
        f"'probit'); got {name}."
    )


def check_on_rows(model, X, y, sample_weight, options):
    """``check_approximation`` of a fitted model (FrameModel or estimator) on its input rows.

    ``options`` holds ``n_draws``, ``random_state`` and ``refine``. The
    check's predictions take ``model``'s own input (a FrameModel's tables).
    """
    checked, Z = laplace_estimator(model, X)
    check = checked.check_approximation(Z, y, sample_weight=sample_weight, **options)
    if checked is not model:
        inner = check.input_map
        check.input_map = lambda rows: (
            model.transform(rows) if inner is None else inner(model.transform(rows))
        )
    return check


def coefficient_table(model, level):
    """Coefficient table on both scales; estimates only for a model without ``coef_table``.

    Parameters
    ----------
    model : fitted estimator (bare or standardised) or FrameModel
    level : float in (0, 1)
        Credible level of the bounds, for models with ``coef_table``.

    Returns
    -------
    pandas.DataFrame
        Indexed by parameter (binary) or (class, parameter); a FrameModel's
        binary table is of its positive class.
    """
    if hasattr(model, "coef_table"):
        return model.coef_table(level)
    inner = getattr(model, "estimator_", model)
    names = list(getattr(model, "feature_names_out_", model.feature_names_in_))
    classes = [str(c) for c in model.classes_]
    coef_std = np.atleast_2d(inner.coef_)
    coef_orig = np.atleast_2d(model.coef_)
    int_std = np.atleast_1d(inner.intercept_)
    int_orig = np.atleast_1d(model.intercept_)
    rows = []
    for k in range(coef_std.shape[0]):
        label = classes[1] if coef_std.shape[0] == 1 else classes[k]
        for j, name in enumerate(names):
            rows.append((label, name, coef_std[k, j], coef_orig[k, j]))
        rows.append((label, "intercept", int_std[k], int_orig[k]))
    table = pd.DataFrame(rows, columns=["class", "parameter", "estimate", "estimate_original"])
    if coef_std.shape[0] > 1:
        return table.set_index(["class", "parameter"])
    table = table.drop(columns="class").set_index("parameter")
    index = getattr(model, "positive_index_", None)
    return table if index is None else oriented_coefficients(table, model.classes_, index)
