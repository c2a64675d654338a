"""Shared classifier bases: label encoding, parameter layout, the Laplace fit.

Two bases live here:

``LinearClassifierBase``
    What every estimator of the package shares: validation of X, y and
    ``sample_weight`` with messages that name the problem, label encoding,
    feature names, the parameter constraints of ``_parameter_constraints``
    (``_checks.params``), and the split of the parameter vector into
    ``coef_`` and ``intercept_``.

``GaussianPosteriorClassifier``
    The Laplace-approximation machinery for models fitted by the shared
    Newton solver (the Laplace logistic and the probit classifiers): MAP fit,
    ``prior_scale="auto"`` by the Laplace evidence (``_fit.evidence``), the
    identification checks (``_fit.identification``), the posterior API
    (``_predictive``) and the approximation self-check (``_approximation``).
    A subclass supplies the likelihood and the binary predictive through
    hooks.
"""

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import check_is_fitted, validate_data

from ._approximation import ApproximationCheckMixin
from ._checks.inputs import (
    as_labels,
    check_magnitude,
    encode_labels,
    plain,
    reject_non_numeric_frame,
    reject_unusable_array,
    row_weights,
    warn_label_variants,
)
from ._checks.params import (
    Boolean,
    Options,
    ParameterTable,
    PositiveFloat,
    PositiveInt,
    RandomState,
    Scale,
)
from ._fit.evidence import log_evidence, maximise_evidence
from ._fit.hyperparameter import maximise_joint_evidence
from ._fit.identification import check_identification
from ._fit.newton import NewtonProblem, solve_map
from ._fit.posterior import GaussianPosterior
from ._fit.special import expit, log_normalise
from ._linear.centring import centre_columns, map_back
from ._linear.layout import ParameterLayout
from ._linear.sources import dask_aware, fit_data
from ._linear.threads import passes_own_threads
from ._predictive import PosteriorPredictiveMixin

#: The loosest usable Newton tolerance: half the squared decrement at 0.01
#: nats puts the point about 0.14 posterior sd from the MAP; a looser one
#: (tol=inf stopped after one step) returns a point that is not the MAP.
TOL_MAX = 1e-2


class LinearClassifierBase(ClassifierMixin, BaseEstimator):
    """Validation, label encoding and parameter layout for linear classifiers."""

    #: Binary-only models set this to True.
    binary_only = False

    #: The constraints of the constructor's parameters (``_checks.params``).
    _parameter_constraints = ParameterTable({})

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        if self.binary_only:
            tags.classifier_tags.multi_class = False
        return tags

    def _check_params(self):
        """Check every constructor parameter against ``_parameter_constraints``.

        Returns a dict of the checked values (floats as float, ...), which
        subclasses keep where they need the converted value.
        """
        return self._parameter_constraints.check(self)

    # -- input -------------------------------------------------------------
    def _validate_fit_data(self, X, y, sample_weight):
        """Checked float64 X (never a modified caller array), codes, weights.

        Returns
        -------
        X : ndarray (n, d), float64, C order
        y_codes : ndarray (n,), int64 codes into ``classes_``
        w : ndarray (n,), float64, non-negative with a positive sum
        """
        reject_non_numeric_frame(X)
        reject_unusable_array(X)
        y = as_labels(y)
        if sample_weight is not None:
            reject_unusable_array(sample_weight, "sample_weight")
        X, y = validate_data(
            self,
            X,
            y,
            dtype=np.float64,
            order="C",
            ensure_min_samples=1,
            y_numeric=False,
            ensure_all_finite=False,
        )
        check_magnitude(X)
        if y.dtype.kind not in "biu":
            # Integer or boolean 1-D labels are always class labels; the
            # check (a second sort of y) is for floats and objects.
            check_classification_targets(y)
        self.classes_, y_codes = encode_labels(y)
        warn_label_variants(self.classes_)
        n_classes = len(self.classes_)
        if n_classes < 2:
            raise ValueError(
                f"y contains only one class ({plain(self.classes_[0])!r}); a classifier needs "
                "at least two classes."
            )
        if self.binary_only and n_classes > 2:
            raise ValueError("Only binary classification is supported.")
        w = row_weights(sample_weight, X)
        if sample_weight is not None:
            if w.sum() <= 0:
                raise ValueError("sample_weight sums to zero; at least one row needs weight > 0.")
            present = np.unique(y_codes[w > 0])
            if len(present) < 2:
                raise ValueError(
                    "only one class has positive sample_weight "
                    f"({plain(self.classes_[present[0]])!r}); a classifier needs at least two "
                    "classes."
                )
        return X, y_codes, w

    def _fit_data(self, X, y, sample_weight):
        """Checked fit input of any kind (``_linear.sources.FitData``), recorded on self."""

        def validate(X, y, sample_weight):
            X, codes, w = self._validate_fit_data(X, y, sample_weight)
            return X, codes, w, self.classes_, getattr(self, "feature_names_in_", None)

        data = fit_data(
            X,
            y,
            sample_weight,
            fit_intercept=self.fit_intercept,
            binary_only=self.binary_only,
            validate=validate,
        )
        data.record(self)
        return data

    def _validate_predict_data(self, X, check_range=True):
        """X as a C-ordered float64 array, or a clear error.

        ``check_range=False`` leaves out the NaN/inf/magnitude scan, for
        callers whose own pass over X checks the same (the binary moments).
        """
        check_is_fitted(self, "coef_")
        reject_non_numeric_frame(X)
        reject_unusable_array(X)
        X = validate_data(
            self, X, reset=False, dtype=np.float64, order="C", ensure_all_finite=False
        )
        if check_range:
            check_magnitude(X, per_column=False)
        return X

    # -- naming ------------------------------------------------------------
    def _feature_names(self):
        names = getattr(self, "feature_names_in_", None)
        if names is not None:
            return [str(n) for n in names]
        return [f"x{j}" for j in range(self.n_features_in_)]

    def _parameter_index(self):
        """Index of the full parameter vector: coef rows, then intercepts."""
        return ParameterLayout.of_estimator(self).names(self._feature_names(), self.classes_)

    def _set_coef(self, layout, theta):
        W, b = layout.split(theta)
        self.coef_ = np.array(W)
        self.intercept_ = np.array(b) if self.fit_intercept else np.zeros(layout.q)

    # -- prediction --------------------------------------------------------
    @dask_aware
    def predict(self, X):
        """Most probable class for each row.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples,), values from ``classes_``.
        """
        scores = self.decision_function(X)
        if scores.ndim == 1:
            return self.classes_[(scores > 0).astype(int)]
        return self.classes_[np.argmax(scores, axis=1)]

    @dask_aware
    def predict_log_proba(self, X):
        """Log of ``predict_proba``, computed without taking log of a rounded 0."""
        scores = self.decision_function(X)
        if scores.ndim == 1:
            return np.column_stack([-np.logaddexp(0, scores), -np.logaddexp(0, -scores)])
        return log_normalise(scores)

    @dask_aware
    def predict_proba(self, X):
        """Predictive class probabilities, shape (n_samples, n_classes); rows sum to 1."""
        scores = self.decision_function(X)
        if scores.ndim == 1:
            p1 = expit(scores)
            return np.column_stack([expit(-scores), p1])
        P = np.exp(log_normalise(scores))
        return P / P.sum(axis=1, keepdims=True)


def free_parameter_map(design, slope_prior, intercept_prior):
    """T with full = T @ free, or None for the identity (``ParameterLayout.free_map``)."""
    return design.layout.free_map(slope_prior, intercept_prior)


class GaussianPosteriorClassifier(
    ApproximationCheckMixin, PosteriorPredictiveMixin, LinearClassifierBase
):
    """Base of the models fitted by Newton MAP plus a Laplace posterior.

    Subclasses define ``_make_likelihood(n_classes)``, ``_binary_decision``
    (log-odds of the predictive given the latent mean and variance),
    ``_binary_link`` and ``_parameter_constraints`` (whose ``predictive``
    entry lists the predictive options).
    """

    #: Subclasses replace the ``predictive`` entry with their options.
    _parameter_constraints = ParameterTable(
        {
            "prior_scale": Scale(allow_auto=True),
            "intercept_prior_scale": Scale(),
            "max_iter": PositiveInt(),
            "tol": PositiveFloat(maximum=TOL_MAX, why="nats of the objective above its minimum"),
            "predictive": Options("map", "mc"),
            "n_draws": PositiveInt(),
            "fit_intercept": Boolean(),
            "random_state": RandomState(),
        }
    )

    # -- hooks ---------------------------------------------------------------
    def _make_likelihood(self, n_classes):  # pragma: no cover - abstract
        raise NotImplementedError

    def _binary_decision(self, mean, var):  # pragma: no cover - abstract
        raise NotImplementedError

    def _likelihood_search(self, n_classes):
        """None, or a ``_fit.hyperparameter.LikelihoodSearch``: a likelihood
        hyperparameter that the evidence chooses with the prior scale.

        ``fit`` then maximises the Laplace evidence over both and reports
        the posterior averaged over the hyperparameter (``_fit.
        hyperparameter``) instead of fitting ``_make_likelihood``'s; the
        chosen value and its posterior sd are kept as ``_hyperparameter``
        (None without a search).
        """
        return None

    # -- fitting ---------------------------------------------------------------
    def _check_params(self):
        checked = super()._check_params()
        self._prior_scale = checked["prior_scale"]
        self._intercept_scale = checked["intercept_prior_scale"]
        return checked

    def fit(self, X, y, sample_weight=None):
        """Find the MAP, the Laplace posterior and the evidence.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Numeric features; never modified.
        y : array-like of shape (n_samples,)
            Class labels (any hashable, sortable type).
        sample_weight : array-like of shape (n_samples,), optional
            Non-negative frequency weights: the objective is the weighted
            SUM of per-row negative log-likelihoods, so an integer weight is
            the same as repeating the row.

        Returns
        -------
        self
        """
        self._check_params()
        data = self._fit_data(X, y, sample_weight)
        design, back = centre_columns(data.design, self._intercept_scale, self._feature_names)
        y_fit, w = data.y, data.w
        likelihood = self._make_likelihood(len(self.classes_))
        search = self._likelihood_search(len(self.classes_))
        layout = design.layout
        free_map = layout.free_map(
            self._prior_scale is not None, self._intercept_scale is not None
        )

        tol = self._scaled_tol(design, w)

        def fit_at(scale, phi0=None, warn=True, lik=None):
            lik = likelihood if lik is None else lik
            prior = layout.prior_precision(scale, self._intercept_scale)
            problem = NewtonProblem(design, lik, y_fit, w, prior, free_map)
            result = solve_map(problem, phi0, max_iter=self.max_iter, tol=tol, warn=warn)
            return result, log_evidence(
                layout, problem.p_free, result, scale, self._intercept_scale
            )

        # Memory-mapped or dask input runs the same solver over a design whose
        # passes run block by block where the data are (``_linear.sources``).
        with passes_own_threads():
            self._hyperparameter = None
            if search is not None:
                joint = maximise_joint_evidence(
                    design, w, fit_at, search, self._prior_scale, free_map
                )
                scale, result, log_ev = joint.scale, joint.result, joint.log_evidence
                likelihood, mean, chol = joint.likelihood, joint.theta, joint.chol
                self._hyperparameter = (joint.value, joint.value_sd)
            else:
                if self._prior_scale == "auto":
                    scale, result, log_ev = maximise_evidence(design, w, fit_at)
                else:
                    scale = self._prior_scale
                    result, log_ev = fit_at(scale)
                mean, chol = result.theta, result.chol
            # The fit ran on centred columns where ``back`` is given.
            mean, posterior_map = map_back(back, mean, free_map)

            self.prior_scale_ = scale
            self.log_evidence_ = log_ev
            self.n_iter_ = result.n_iter
            self._set_coef(layout, mean)
            self._posterior = GaussianPosterior(mean, chol, posterior_map)
            self.posterior_mean_ = np.array(mean)
            self.posterior_cov_ = self._posterior.cov
            if self._prior_scale is None:
                check_identification(design, likelihood, y_fit, w, result, self._free_names)
        return self

    def _scaled_tol(self, design, w):
        """``tol``, per unit of mean row weight when no parameter has a proper prior.

        Without a proper prior the MAP (the maximum likelihood) does not move
        when every weight is multiplied by c, but the objective and its
        decrement do; in these units weights of 1e-12 converge as far as
        weights of 1 (the iterates are the same).
        """
        flat = self._prior_scale is None and (
            self._intercept_scale is None or not self.fit_intercept
        )
        return self.tol * (design.weight_total(w) / design.n if flat else 1.0)

    def _free_names(self):
        """Names of the free parameters (multiclass without a prior: the first class is fixed)."""
        layout = ParameterLayout.of_estimator(self)
        names = list(self._parameter_index())
        if layout.q == 1:
            return names
        return [f"{c}:{p}" for (c, p), free in zip(names, layout.free_mask(), strict=True) if free]
