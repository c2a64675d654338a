"""Label-noise-robust linear classifier: the bi-tempered logistic loss."""

import warnings

import numpy as np
from sklearn.exceptions import ConvergenceWarning

from ._base import TOL_MAX, LinearClassifierBase
from ._checks.params import (
    Boolean,
    Interval,
    Options,
    ParameterTable,
    PositiveFloat,
    PositiveInt,
    Scale,
)
from ._fit.lbfgs import minimize_scaled
from ._fit.likelihoods import BinaryLogistic, MultinomialLogistic
from ._fit.newton import NewtonProblem, solve_map
from ._fit.tempered_likelihood import BiTemperedLikelihood
from ._kernels.tempered_dispatch import probabilities
from ._linear.layout import ParameterLayout
from ._linear.scaling import ColumnScaling
from ._linear.sources import dask_aware

# Rows of the sample on which the convex start is fitted when the data are
# larger: the start only has to land in the right basin.
_START_ROWS = 20_000


def convex_start(data, prior, slope_prior):
    """The t1 = t2 = 1 solution: penalised logistic regression by Newton.

    Parameters
    ----------
    data : FitData
    prior : ndarray of shape (p_full,)
        Prior precision of the slopes (0 for the intercepts).
    slope_prior : bool
        Whether the slopes have a penalty (else the multiclass start fixes
        a reference class, see ``ParameterLayout.free_map``).

    Returns
    -------
    ndarray of shape (p_full,)
    """
    design = data.design
    layout = design.layout
    likelihood = BinaryLogistic() if layout.q == 1 else MultinomialLogistic(layout.q)
    free_map = layout.free_map(slope_prior, False)
    problem = NewtonProblem(design, likelihood, data.y, data.w, prior, free_map)
    if design.n > _START_ROWS:
        # The logistic fit on a row sample (weights rescaled to the full
        # total) lands in the same basin as the full-data solve.
        problem = problem.subsample(_START_ROWS) or problem
    # As in the Laplace fit, the design's thread policy holds for the
    # whole Newton solve (toggling it per pass made each small Cholesky
    # wait for OpenBLAS's threads).
    with warnings.catch_warnings(), problem.design.pass_threads():
        # Separation or a slow start is harmless here: L-BFGS carries on.
        warnings.simplefilter("ignore")
        theta = solve_map(problem, max_iter=50, tol=1e-6, warn=False).theta
    if not np.all(np.isfinite(theta)):
        return np.zeros(layout.p_full)
    # Without a penalty and separated classes the logistic start runs
    # off to large norms; the bounded loss has no use for that.
    limit = 50.0 / max(float(design.column_max_abs().max()), 1e-12)
    largest = np.max(np.abs(layout.slopes(theta)))
    if largest > limit:
        theta = theta * (limit / largest)
    return theta


class TemperedLogisticClassifier(LinearClassifierBase):
    """Linear classifier trained with the bi-tempered logistic loss.

    The loss of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic
    Loss Based on Bregman Divergences" (NeurIPS 2019) has two temperatures:
    ``t1 < 1`` makes the loss bounded (at most 1 / (1 - t1) per row), so a
    mislabelled row far from the decision boundary cannot pull the fit
    without limit; ``t2 > 1`` makes the probabilities a heavy-tailed
    tempered softmax, which decays polynomially instead of exponentially
    and so gives way for mislabelled rows near the boundary. With
    ``t1 = t2 = 1`` it is ordinary (multinomial) logistic regression.

    Parameters
    ----------
    t1 : float in [0, 1], default=0.8
        Temperature of the logarithm in the loss; below 1 the loss is
        bounded.
    t2 : float in [1, 5], default=1.2
        Temperature of the tempered softmax. The kernels accept t2 < 1, but
        then the softmax has finite support: rows outside it get
        probability exactly 0 and no gradient, and a fit can stall with
        whole classes unreachable, so the estimator refuses it.
    label_smoothing : float in [0, 1), default=0.0
        Labels become (1 - label_smoothing) * onehot + label_smoothing / K.
    prior_scale : float > 0 or None, default=1.0
        L2 penalty ||w||^2 / (2 prior_scale^2) on the slopes (the negative
        log of a N(0, prior_scale^2) prior); None: no penalty. The
        intercept is not penalised.
    fit_intercept : bool, default=True
    start : {"convex", "zero"}, default="convex"
        Starting point of L-BFGS: "convex" is the t1 = t2 = 1 solution
        (penalised logistic regression, solved by Newton), which puts the
        non-convex bi-tempered fit in the basin of a sensible answer;
        "zero" starts from all-zero parameters.
    max_iter : int, default=500
        L-BFGS iterations.
    tol : float in (0, 0.01], default=1e-6
        L-BFGS stops when the largest entry of the gradient of the mean
        objective (divided by ``sum(sample_weight)``) is below ``tol``, the
        gradient taken with respect to the parameters of the features
        centred and scaled to unit weighted spread, so that the test means
        the same whatever the units of the features.
    warm_start : bool, default=False
        Start from the previous fit's parameters when refitting with the
        same classes and features.

    Attributes
    ----------
    classes_ : ndarray of shape (K,)
    coef_ : ndarray of shape (1, d) (binary) or (K, d)
    intercept_ : ndarray of shape (1,) or (K,)
        For K > 2 the common shift of the K rows is not identified (the
        tempered softmax is shift invariant); the fitted values are centred
        across classes (intercepts always; slopes too without a penalty).
    loss_ : float
        Final objective: weighted sum of per-row losses plus the penalty.
    n_iter_ : int
        L-BFGS iterations of the final fit.
    n_features_in_ : int
    feature_names_in_ : ndarray of str, when X had string column names.

    Notes
    -----
    Binary models use one weight vector with activations (0, x^T w + b).
    Fitting is by L-BFGS (scipy) on the weighted SUM of per-row losses plus
    the penalty, with the analytic gradient: the kernel's derivative with
    respect to the activations, mapped to the parameters by one BLAS
    product with X.

    A list of doubtful labels from this model is a screening aid; where the
    labels matter to people, a person who can check the records decides.
    """

    def __init__(
        self,
        *,
        t1=0.8,
        t2=1.2,
        label_smoothing=0.0,
        prior_scale=1.0,
        fit_intercept=True,
        start="convex",
        max_iter=500,
        tol=1e-6,
        warm_start=False,
    ):
        self.t1 = t1
        self.t2 = t2
        self.label_smoothing = label_smoothing
        self.prior_scale = prior_scale
        self.fit_intercept = fit_intercept
        self.start = start
        self.max_iter = max_iter
        self.tol = tol
        self.warm_start = warm_start

    _parameter_constraints = ParameterTable(
        {
            "t1": Interval(0.0, 1.0, why="t1 < 1 bounds the loss"),
            "t2": Interval(
                1.0,
                5.0,
                why="t2 > 1 gives heavy tails; t2 < 1 gives a softmax with finite support, "
                "which can leave classes with zero probability and no gradient",
            ),
            "label_smoothing": Interval(0.0, 1.0, closed="left"),
            "prior_scale": Scale(),
            "start": Options("convex", "zero", listing="or"),
            "max_iter": PositiveInt(),
            "tol": PositiveFloat(
                maximum=TOL_MAX, why="the mean objective's largest gradient entry"
            ),
            "fit_intercept": Boolean(),
            "warm_start": Boolean(),
        }
    )

    def _check_params(self):
        checked = super()._check_params()
        self._t1, self._t2, self._scale = checked["t1"], checked["t2"], checked["prior_scale"]
        return checked

    # -- fitting -------------------------------------------------------------
    def fit(self, X, y, sample_weight=None):
        """Fit by L-BFGS on the weighted sum of bi-tempered losses.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
            Numeric features; never modified.
        y : array-like of shape (n_samples,)
        sample_weight : array-like of shape (n_samples,), optional
            Non-negative frequency weights (integer weights equal repeated
            rows).

        Returns
        -------
        self
        """
        self._check_params()
        previous = self._previous_parameters()
        data = self._fit_data(X, y, sample_weight)
        design = data.design
        prior = design.layout.prior_precision(self._scale)
        likelihood = BiTemperedLikelihood(self._t1, self._t2, self.label_smoothing, design.q)
        # Loads while the convex start runs.
        likelihood.load_kernel(design.n)
        theta0 = self._starting_point(data, prior, previous)
        problem = NewtonProblem(design, likelihood, likelihood.labels(data.y), data.w, prior)

        def objective(theta):
            value, grad, _, _ = problem.value_grad(theta)
            # Successive evaluations are at nearby parameters: from now on
            # each row's normaliser starts from its previous value.
            likelihood.warm = True
            return value, grad

        # L-BFGS works on the parameters of centred, unit-spread columns (see
        # _fit.lbfgs): its steps and gradient test then mean the same
        # whatever the units of the features and of the weights.
        scaling = ColumnScaling.of_design(design, data.w)
        with design.pass_threads():
            result = minimize_scaled(
                objective,
                theta0,
                scaling,
                design.n,
                design.weight_total(data.w),
                self.max_iter,
                self.tol,
            )
        if result.stopped_at_limit:
            warnings.warn(
                f"L-BFGS did not converge in {self.max_iter} iterations ({result.message}); "
                "increase max_iter, standardise the features or strengthen prior_scale.",
                ConvergenceWarning,
                stacklevel=2,
            )
        W, b = design.layout.split(self._canonical(design.layout, result.theta))
        self.coef_ = np.array(W)
        self.intercept_ = np.array(b)
        self.loss_ = result.value
        self.n_iter_ = result.n_iter
        return self

    def _previous_parameters(self):
        if not (self.warm_start and hasattr(self, "coef_")):
            return None
        return ParameterLayout.of_estimator(self).join(self.coef_, self.intercept_)

    def _starting_point(self, data, prior, previous):
        """The previous fit's parameters (warm start), the convex start, or zeros."""
        p_full = data.design.layout.p_full
        if previous is not None and previous.shape == (p_full,):
            return previous
        if self.start == "convex":
            return convex_start(data, prior, self._scale is not None)
        return np.zeros(p_full)

    def _canonical(self, layout, theta):
        """Centre the unidentified common shift of a multiclass fit."""
        if layout.q == 1:
            return theta
        theta = theta.copy()
        W, b = layout.split(theta)
        if self._scale is None:
            W -= W.mean(axis=0)
        if layout.fit_intercept:
            b -= b.mean()
        return theta

    # -- prediction ----------------------------------------------------------
    @dask_aware
    def decision_function(self, X):
        """Activations: shape (n_samples,) for binary (class 1 against an
        activation of 0 for class 0), (n_samples, K) for multiclass. They
        rank rows and classes exactly as ``predict_proba``."""
        X = self._validate_predict_data(X)
        if self.coef_.shape[0] == 1:
            return X @ self.coef_[0] + self.intercept_[0]
        return X @ self.coef_.T + self.intercept_

    @dask_aware
    def predict(self, X):
        """Class with the largest activation (= the largest probability)."""
        scores = self.decision_function(X)
        if scores.ndim == 1:
            return self.classes_[(scores > 0).astype(int)]
        return self.classes_[np.argmax(scores, axis=1)]

    @dask_aware
    def predict_proba(self, X):
        """Tempered softmax probabilities at t2, shape (n_samples, K); rows sum to 1."""
        X = self._validate_predict_data(X)
        # Overflow is reported below, as one error.
        with np.errstate(over="ignore", invalid="ignore"):
            if self.coef_.shape[0] == 1:
                # Both columns from the normaliser, not 1 - p1: where p1
                # rounds to 1 the small class-0 probability (a polynomial tail
                # for t2 > 1) would be lost to 0, and predict_log_proba would
                # give -inf. The activations (0, a) are written in place: the
                # public function's copy and scan would repeat X's checks.
                scores = np.zeros((X.shape[0], 2))
                scores[:, 1] = np.dot(X, self.coef_[0])
                scores[:, 1] += self.intercept_[0]
            else:
                scores = np.dot(X, self.coef_.T)
                scores += self.intercept_
        if not np.all(np.isfinite(scores)):
            # |x| is bounded by the input check, but a product can overflow.
            raise ValueError("the activations X @ coef_.T overflow; rescale X.")
        return probabilities(scores, float(self.t2))

    @dask_aware
    def predict_log_proba(self, X):
        """Log of ``predict_proba`` (probabilities are > 0 for t2 >= 1)."""
        with np.errstate(divide="ignore"):
            return np.log(self.predict_proba(X))

    def label_doubt(self, X, y):
        """How strongly the fitted model disagrees with each row's label.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
            The recorded labels, from ``classes_``.

        Returns
        -------
        ndarray of shape (n_samples,)
            -log P(recorded label | x) under the fitted tempered model, in
            nats, >= 0; larger means more doubt. Because the bounded loss
            let the fit ignore rows it cannot explain instead of bending
            towards them, these rows stand out more than under a logistic
            fit.
        """
        P = self.predict_proba(X)
        y = np.asarray(y)
        if y.shape != (P.shape[0],):
            raise ValueError(f"y must have shape ({P.shape[0]},); got {y.shape}.")
        index = np.searchsorted(self.classes_, y)
        index = np.clip(index, 0, len(self.classes_) - 1)
        unknown = self.classes_[index] != y
        if np.any(unknown):
            bad = sorted({str(v) for v in y[unknown]})[:5]
            raise ValueError(f"labels not seen in fit: {', '.join(bad)}.")
        p = P[np.arange(len(y)), index]
        return -np.log(np.maximum(p, np.finfo(float).tiny))
