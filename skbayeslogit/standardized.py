"""Fit a classifier on standardised features, report it on both scales.

A single ``prior_scale`` for every slope only makes sense when the slopes are
on comparable scales: a prior of sd 1 on "log-odds per gram" and on
"log-odds per degree Brix" says very different things. Standardising every
feature to mean 0 and standard deviation 1 before the fit makes the prior act
on "log-odds per standard deviation of the feature", the same statement for
every column. :class:`StandardizedClassifier` does that inside the estimator,
so predictions take features in their recorded units, and translates the
posterior back to those units exactly (the map between the two
parametrisations is linear, so a Gaussian posterior stays Gaussian).
"""

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.utils.metaestimators import available_if
from sklearn.utils.validation import check_is_fitted, validate_data

from ._approximation import DEFAULT_CHECK_DRAWS
from ._checks.inputs import (
    check_level,
    check_magnitude,
    check_options,
    check_positive_int,
    reject_non_numeric_frame,
)
from ._checks.params import HasMethods, ParameterTable
from ._fit.posterior import summary_table
from ._linear.columns import column_moments
from ._linear.layout import ParameterLayout

__all__ = ["StandardizedClassifier"]


def _inner_has(name):
    """available_if check: the wrapped estimator offers ``name``."""

    def check(self):
        target = self.estimator_ if hasattr(self, "estimator_") else self.estimator
        return hasattr(target, name)

    return check


# StandardizedClassifier.check_approximation, defined outside the class body
# (held to 300 lines by the house rules) and bound in it below.
def check_standardized_approximation(
    self,
    X,
    y,
    sample_weight=None,
    n_draws=DEFAULT_CHECK_DRAWS,
    random_state=None,
    refine=False,
):
    """The wrapped estimator's approximation self-check, on the standardised features.

    The posterior is the wrapped estimator's, so the check is too:
    ``X`` (recorded units) is standardised with the fitted centre and
    scale and handed to its ``check_approximation`` with the other
    arguments (see there). ``pareto_k``, ``ess``, ``reliable`` and the
    verdict do not depend on the scale (standardising is a linear
    change of the parameters, which leaves the importance ratios as
    they are).

    Returns
    -------
    ApproximationCheck
        Its ``coef_table`` and ``mean_shift`` are on the STANDARDISED
        scale (compare with ``coef_table(scale="standardized")``); its
        ``predict_proba`` and ``predict_interval`` take features in
        recorded units, as this wrapper's do.
    """
    check_is_fitted(self, "estimator_")
    check = self.estimator_.check_approximation(
        self._standardize(X),
        y,
        sample_weight=sample_weight,
        n_draws=n_draws,
        random_state=random_state,
        refine=refine,
    )
    check.input_map = self._standardize
    return check


class StandardizedClassifier(ClassifierMixin, BaseEstimator):
    """Wrap a linear classifier so that it is fitted on standardised features.

    Each feature is centred on its mean and divided by its standard
    deviation (population sd, ``ddof=0``, over the training rows) before
    the wrapped estimator sees it; prediction applies the same map, so the
    wrapper takes and predicts from features in their original units. A
    constant feature is centred but not rescaled.

    The point of the wrapper is the prior: with a Bayesian estimator,
    ``prior_scale`` is then the prior standard deviation of the change in
    the linear predictor per standard deviation of each feature, so one
    scale means the same thing for every column (and ``prior_scale="auto"``
    chooses it by the evidence on that scale).

    Parameters
    ----------
    estimator : classifier
        Unfitted estimator with ``fit`` and ``predict_proba``; it is cloned,
        never fitted in place. Linear models from this package expose their
        posterior through the wrapper on both scales.

    Attributes
    ----------
    estimator_ : classifier
        The clone fitted on the standardised features. Its ``coef_``,
        ``posterior_mean_`` and ``coef_table()`` are on the standardised
        scale.
    center_ : ndarray of shape (n_features,)
        Subtracted from each feature (its mean; zeros when the wrapped
        estimator has ``fit_intercept=False``, since centring would then
        change the model rather than reparametrise it).
    scale_ : ndarray of shape (n_features,), > 0
        Divides each centred feature.
    classes_ : ndarray of shape (n_classes,)
    n_features_in_ : int
    feature_names_in_ : ndarray of str, when X was a DataFrame with string
        column names.
    coef_, intercept_ : ndarray of shape (q, n_features), (q,)
        Only when the wrapped estimator is linear (has ``coef_``):
        coefficients on the ORIGINAL units, so that the latent predictor is
        ``X @ coef_.T + intercept_`` with X as recorded. ``q`` is 1 (binary)
        or the number of classes.
    posterior_mean_, posterior_cov_ : ndarray of shape (p,), (p, p)
        Only when the wrapped estimator has a Gaussian posterior: its
        posterior translated to the original units (same parameter order:
        the coefficient row(s), then the intercept(s)).
    prior_scale_, log_evidence_, n_iter_ :
        Copied from the wrapped estimator when it has them (``prior_scale_``
        is on the standardised scale).

    Notes
    -----
    With original-scale coefficient ``c_j = s_j / scale_j`` for a
    standardised slope ``s_j`` and intercept
    ``b = b_std - sum_j s_j center_j / scale_j``, the map from standardised
    to original parameters is linear, ``theta = A theta_std``, so the
    original-scale posterior is exactly ``N(A m, A S A^T)``.

    As with every model in this package, the output is a statistical
    screening aid; where decisions affect people it does not replace review
    by someone who knows the domain.
    """

    _parameter_constraints = ParameterTable({"estimator": HasMethods("fit")})

    def __init__(self, estimator):
        self.estimator = estimator

    # -- fitting ---------------------------------------------------------------
    def fit(self, X, y, sample_weight=None):
        """Standardise X, then fit a clone of ``estimator``.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Numeric features in their recorded units; never modified.
        y : array-like of shape (n_samples,)
        sample_weight : array-like of shape (n_samples,), optional
            Passed to the wrapped estimator's ``fit`` (the centre and scale
            are unweighted).

        Returns
        -------
        self
        """
        self._parameter_constraints.check(self)
        reject_non_numeric_frame(X)
        X = validate_data(self, X, dtype=np.float64, ensure_all_finite=True)
        # The estimators' magnitude rule, before any arithmetic: the sd of a
        # column scaled by 1e200 overflows to inf and the column became zeros.
        check_magnitude(X)
        fit_intercept = getattr(self.estimator, "fit_intercept", True)
        # Frequency weights: the centre and spread of the rows as repeated,
        # so a weight of k standardises exactly as k copies of the row would.
        w = None if sample_weight is None else np.asarray(sample_weight, dtype=np.float64)
        if w is not None and w.shape != (X.shape[0],):
            raise ValueError(f"sample_weight has shape {w.shape}; expected ({X.shape[0]},).")
        mean, sd = column_moments(X, w)
        self.center_ = mean if fit_intercept else np.zeros(X.shape[1])
        # A constant column keeps scale 1: dividing by zero helps no one, and
        # the wrapped estimator reports the dependence on the intercept.
        self.scale_ = np.where(sd > 0, sd, 1.0)
        self.estimator_ = clone(self.estimator)
        Z = self._as_inner_input(X)
        if sample_weight is None:
            self.estimator_.fit(Z, y)
        else:
            self.estimator_.fit(Z, y, sample_weight=sample_weight)
        self.classes_ = self.estimator_.classes_
        for name in ("prior_scale_", "log_evidence_", "n_iter_"):
            if hasattr(self.estimator_, name):
                setattr(self, name, getattr(self.estimator_, name))
        if hasattr(self.estimator_, "coef_"):
            self._set_original_parameters()
        return self

    def _as_inner_input(self, X):
        """Standardised copy of checked X, with the column names if any."""
        Z = (X - self.center_) / self.scale_
        names = getattr(self, "feature_names_in_", None)
        if names is not None:
            return pd.DataFrame(Z, columns=names)
        return Z

    def _standardize(self, X):
        check_is_fitted(self, "estimator_")
        reject_non_numeric_frame(X)
        X = validate_data(self, X, reset=False, dtype=np.float64, ensure_all_finite=True)
        return self._as_inner_input(X)

    def _to_original_matrix(self):
        """A with theta_original = A @ theta_standardised (full layout)."""
        inner = self.estimator_
        q, d = np.shape(inner.coef_)
        layout = ParameterLayout(q, d, getattr(inner, "fit_intercept", True))
        A = np.zeros((layout.p_full, layout.p_full))
        inv = 1.0 / self.scale_
        cols = np.arange(d)
        for k in range(q):
            slopes = layout.index(k, cols)
            A[slopes, slopes] = inv
            if layout.fit_intercept:
                b = layout.index(k, d)
                A[b, slopes] = -self.center_ * inv
                A[b, b] = 1.0
        return A

    def _set_original_parameters(self):
        inner = self.estimator_
        A = self._to_original_matrix()
        self._A = A
        W = np.atleast_2d(np.asarray(inner.coef_, dtype=np.float64))
        b = np.ravel(np.asarray(inner.intercept_, dtype=np.float64))
        self.coef_ = W / self.scale_
        self.intercept_ = b - W @ (self.center_ / self.scale_)
        if hasattr(inner, "posterior_mean_") and hasattr(inner, "posterior_cov_"):
            self.posterior_mean_ = A @ inner.posterior_mean_
            self.posterior_cov_ = A @ inner.posterior_cov_ @ A.T

    # -- prediction --------------------------------------------------------------
    def predict(self, X):
        """Predicted class labels, shape (n_samples,)."""
        return self.estimator_.predict(self._standardize(X))

    def predict_proba(self, X):
        """Class probabilities, shape (n_samples, n_classes)."""
        return self.estimator_.predict_proba(self._standardize(X))

    @available_if(_inner_has("predict_log_proba"))
    def predict_log_proba(self, X):
        """Log class probabilities, shape (n_samples, n_classes)."""
        return self.estimator_.predict_log_proba(self._standardize(X))

    @available_if(_inner_has("decision_function"))
    def decision_function(self, X):
        """The wrapped estimator's decision function on standardised X."""
        return self.estimator_.decision_function(self._standardize(X))

    @available_if(_inner_has("logit_moments"))
    def logit_moments(self, X):
        """Posterior moments of the latent predictor (invariant to the scaling).

        Returns
        -------
        mean : ndarray of shape (n_samples,) or (n_samples, K)
        var : ndarray of shape (n_samples,) or (n_samples, K, K)
        """
        return self.estimator_.logit_moments(self._standardize(X))

    @available_if(_inner_has("predict_interval"))
    def predict_interval(self, X, level=0.9):
        """Credible bounds of the class probabilities; see the wrapped estimator.

        Returns
        -------
        lower, upper : ndarray of shape (n_samples,) (binary, for
            ``classes_[1]``) or (n_samples, K), values in [0, 1].
        """
        return self.estimator_.predict_interval(self._standardize(X), level=level)

    @available_if(_inner_has("label_doubt"))
    def label_doubt(self, X, y):
        """The wrapped estimator's per-row label-doubt score."""
        return self.estimator_.label_doubt(self._standardize(X), y)

    @available_if(_inner_has("flip_probability"))
    def flip_probability(self, X, y):
        """The wrapped estimator's probability that each recorded label was flipped."""
        return self.estimator_.flip_probability(self._standardize(X), y)

    @available_if(_inner_has("predict_recorded_proba"))
    def predict_recorded_proba(self, X):
        """The wrapped estimator's probabilities of the label as recorded (flips included)."""
        return self.estimator_.predict_recorded_proba(self._standardize(X))

    # -- posterior on both scales ------------------------------------------------
    @available_if(_inner_has("coef_table"))
    def coef_table(self, level=0.9, scale="both"):
        """Posterior summary of every parameter on the chosen scale(s).

        Parameters
        ----------
        level : float in (0, 1)
            Posterior probability inside each credible interval.
        scale : {"both", "standardized", "original"}, default="both"
            "standardized": per standard deviation of each feature (the scale
            the prior acts on; comparable across features). "original": per
            recorded unit of each feature. "both": the standardised columns
            followed by the original ones with an ``_original`` suffix.

        Returns
        -------
        pandas.DataFrame
            One row a parameter (features, then "intercept"; multiclass: a
            (class, parameter) MultiIndex). Columns ``estimate``, ``sd``,
            ``lower``, ``upper``, ``sign_prob`` (posterior probability that
            the parameter has the sign of its estimate; a posterior quantity,
            not a p-value) and, for "both", the same five with the
            ``_original`` suffix. Slopes keep their sign probability across
            scales; the intercept's changes because it is the value at the
            feature means on one scale and at zero on the other.
            ``attrs["level"]`` and ``attrs["scale"]`` record the choices.
        """
        level = check_level(level)
        check_options("scale", scale, ("both", "standardized", "original"))
        check_is_fitted(self, "estimator_")
        std = self.estimator_.coef_table(level)
        if scale == "standardized":
            out = std.copy()
        else:
            orig = summary_table(self.posterior_mean_, self.posterior_cov_, level, std.index)
            if scale == "original":
                out = orig
            else:
                out = pd.concat([std, orig.add_suffix("_original")], axis=1)
        out.attrs = {"level": level, "scale": scale}
        return out

    @available_if(_inner_has("column_evidence"))
    def column_evidence(self, groups=None, X=None, y=None, sample_weight=None):
        """Bayes factor of "no effect" per column (or group of columns).

        "No effect" (the group's slopes are zero) is the same statement on
        both scales, and the prior acts on the standardised one, so the
        wrapped estimator computes it there: without data from its
        posterior (Savage-Dickey), with ``X`` (recorded units, standardised
        here) by refitting. See the wrapped estimator's ``column_evidence``.

        Returns
        -------
        pandas.DataFrame
        """
        check_is_fitted(self, "estimator_")
        if X is not None:
            X = self._standardize(X)
        return self.estimator_.column_evidence(groups, X, y, sample_weight)

    check_approximation = available_if(_inner_has("check_approximation"))(
        check_standardized_approximation
    )

    @available_if(_inner_has("sample_coef"))
    def sample_coef(self, n, random_state=None):
        """Posterior draws of the parameters on the ORIGINAL units.

        Parameters
        ----------
        n : int
        random_state : int, RandomState or None

        Returns
        -------
        ndarray of shape (n, n_parameters)
            Columns in the order of ``posterior_mean_``.
        """
        check_is_fitted(self, "estimator_")
        n = check_positive_int("n", n)
        draws = self.estimator_.sample_coef(n, random_state=random_state)
        return draws @ self._A.T
