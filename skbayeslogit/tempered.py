"""Label-noise-robust linear classifier: the bi-tempered logistic loss."""

import contextlib
import numbers
import warnings

import numpy as np
from scipy.optimize import minimize
from sklearn.exceptions import ConvergenceWarning

from ._base import LinearClassifierBase, free_parameter_map
from ._checks.inputs import check_bool, check_positive_float, check_positive_int, check_scale
from ._fit.likelihoods import BinaryLogistic, MultinomialLogistic
from ._fit.newton import NewtonProblem, solve_map
from ._kernels.config import serial_kernels
from ._linear.design import LinearDesign
from ._linear.sources import dask_aware, fit_design, is_out_of_core
from ._linear.threads import passes_own_threads
from .tempered_functions import (
    bitempered_loss,
    bitempered_loss_binary,
    bitempered_loss_warm,
    tempered_softmax,
)

# Rows of the sample on which the convex (t1 = t2 = 1) start is fitted when
# the data are larger.
_CONVEX_START_ROWS = 20_000


def _check_temperature(name, value, low, high, why):
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise TypeError(f"{name} must be a float; got {type(value).__name__}.")
    value = float(value)
    if not (np.isfinite(value) and low <= value <= high):
        raise ValueError(f"{name} must be in [{low:g}, {high:g}] ({why}); got {value!r}.")
    return value


class _ColumnScaling:
    """Map between theta and the parameters u of centred, unit-spread columns.

    With column centres m_j and spreads s_j (weighted mean and sd; without
    an intercept no centring, and s_j the weighted root mean square), the
    linear predictor sum_j x_j theta_kj + b_k equals
    sum_j (x_j - m_j) / s_j u_kj + c_k for u_kj = s_j theta_kj and
    c_k = b_k + sum_j m_j theta_kj. A column with zero spread keeps s_j = 1.
    """

    def __init__(self, X, w, design):
        self.q, self.d = design.q, design.d
        self.fit_intercept = design.fit_intercept
        if getattr(design, "out_of_core", False):
            # The same weighted moments, merged from the validation pass.
            self.centre, spread = design.column_moments(centred=self.fit_intercept)
        else:
            total = float(w.sum())
            self.centre = (w @ X) / total if self.fit_intercept else np.zeros(self.d)
            # Blocks of rows: no temporary the size of X (np.average made
            # two, 35 ms at n = 1e5, d = 20).
            square = np.zeros(self.d)
            rows = max(1, (1 << 20) // (8 * max(self.d, 1)))
            for start in range(0, X.shape[0], rows):
                block = X[start : start + rows] - self.centre
                np.square(block, out=block)
                square += w[start : start + rows] @ block
            spread = np.sqrt(square / total)
        self.spread = np.where(spread > 0, spread, 1.0)

    def _split(self, v):
        W = v[: self.q * self.d].reshape(self.q, self.d)
        b = v[self.q * self.d :]
        return W, b

    def to_theta(self, u):
        Wu, c = self._split(u)
        W = Wu / self.spread
        parts = [W.ravel()]
        if self.fit_intercept:
            parts.append(c - W @ self.centre)
        return np.concatenate(parts)

    def to_u(self, theta):
        W, b = self._split(theta)
        parts = [(W * self.spread).ravel()]
        if self.fit_intercept:
            parts.append(b + W @ self.centre)
        return np.concatenate(parts)

    def gradient_to_u(self, grad):
        """Chain rule: the gradient in theta mapped to the gradient in u."""
        gW, gb = self._split(grad)
        if self.fit_intercept:
            gW = gW - np.outer(gb, self.centre)
        parts = [(gW / self.spread).ravel()]
        if self.fit_intercept:
            parts.append(gb)
        return np.concatenate(parts)


class _TemperedPointwise:
    """The bi-tempered loss as a pointwise function of eta, for blocked passes.

    ``value_grad(y, eta, w)`` gives the weighted loss sum of a block and its
    gradient with respect to eta, weights included, by the same kernels and
    the same arithmetic as the in-memory objective.
    """

    def __init__(self, t1, t2, label_smoothing, q):
        self.t1, self.t2, self.ls, self.q = t1, t2, label_smoothing, q

    def value_grad(self, y, eta, w):
        if self.q == 1:
            loss, dloss = bitempered_loss_binary(eta, y, self.t1, self.t2, self.ls)
            return float(w @ loss), dloss * w
        loss, dloss = bitempered_loss(eta, y, self.t1, self.t2, self.ls)
        return float(w @ loss), dloss * w[:, None]


class _TemperedRows:
    """The bi-tempered loss as the likelihood of an in-memory gradient pass.

    :meth:`LinearDesign.loss_grad` hands it row spans on worker threads (each
    span's predictor, loss and gradient while the span of X is in cache);
    the kernels run serially inside a worker.  Each row's tempered-softmax
    normaliser is kept from one pass to the next as Newton's starting point
    (:func:`bitempered_loss_warm`); ``warm`` says whether the kept values
    are valid, and is set by the caller between passes, never inside one.
    """

    wants_rows = True

    def __init__(self, t1, t2, label_smoothing, q, n):
        self.t1, self.t2, self.ls, self.q = t1, t2, label_smoothing, q
        # Flops a row costs, compared with the pass's BLAS work (measured:
        # about 0.5 us a binary row, 2 us a 10-class row, one thread).
        self.work_per_row = 1000.0 * (q + 1)
        self.normalisers = np.empty(n) if q > 1 else None
        self.warm = False

    def loss_grad(self, y, eta, w, rows):
        with serial_kernels():
            if self.q == 1:
                loss, dloss = bitempered_loss_binary(eta, y, self.t1, self.t2, self.ls)
                return float(w @ loss), dloss * w
            start, stop = rows
            loss, dloss = bitempered_loss_warm(
                eta, y, self.t1, self.t2, self.ls, self.normalisers[start:stop], self.warm
            )
        return float(w @ loss), dloss * w[:, None]


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
    tol : float, default=1e-6
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

    def _check_params(self):
        self._t1 = _check_temperature("t1", self.t1, 0.0, 1.0, "t1 < 1 bounds the loss")
        self._t2 = _check_temperature(
            "t2",
            self.t2,
            1.0,
            5.0,
            "t2 > 1 gives heavy tails; t2 < 1 gives a softmax with finite support, "
            "which can leave classes with zero probability and no gradient",
        )
        ls = self.label_smoothing
        if isinstance(ls, bool) or not isinstance(ls, numbers.Real) or not 0 <= ls < 1:
            raise ValueError(f"label_smoothing must be in [0, 1); got {ls!r}.")
        self._scale = check_scale("prior_scale", self.prior_scale)
        if self.start not in ("convex", "zero"):
            raise ValueError(f"start must be 'convex' or 'zero'; got {self.start!r}.")
        check_positive_int("max_iter", self.max_iter)
        check_positive_float("tol", self.tol)
        check_bool("fit_intercept", self.fit_intercept)
        check_bool("warm_start", self.warm_start)

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
        if is_out_of_core(X, y, sample_weight):
            # Memory-mapped or dask input: each objective evaluation is one
            # blocked pass of the same kernels (see _sources).
            design = fit_design(self, X, y, sample_weight, self.fit_intercept)
            X = codes = w = None
        else:
            X, codes, w = self._validate_fit_data(X, y, sample_weight)
            design = LinearDesign(
                X, 1 if len(self.classes_) == 2 else len(self.classes_), self.fit_intercept
            )
        q = design.q
        prior = np.zeros(design.p_full)
        if self._scale is not None:
            prior[: design.n_coef] = 1.0 / self._scale**2

        if previous is not None and previous.shape == (design.p_full,):
            theta0 = previous
        elif self.start == "convex":
            theta0 = self._convex_start(design, codes, w, prior)
        else:
            theta0 = np.zeros(design.p_full)

        labels = None if codes is None else (codes.astype(np.float64) if q == 1 else codes)
        # L-BFGS is not invariant to the units of the features or of the
        # weights: its first step, its curvature pairs and its gradient test
        # are in parameter units. It therefore works on the parameters u of
        # centred, unit-spread columns and on the objective rescaled as if
        # the weights averaged 1 (exactly the sum for unit weights, which
        # keeps scipy's ftol test, relative only above |f| = 1, where it
        # was); the minimiser in theta is the same, but features scaled by
        # 1e-8 or 1e8 (or weights by 1e300) no longer stop it early or
        # overflow it.
        scaling = _ColumnScaling(X, w, design)
        n_rows = design.n
        unit = n_rows / float(design.total_weight if w is None else w.sum())
        pointwise = _TemperedPointwise(self._t1, self._t2, self.label_smoothing, q)
        rows = _TemperedRows(self._t1, self._t2, self.label_smoothing, q, n_rows)

        def objective_out_of_core(u):
            theta = scaling.to_theta(u)
            value, grad = design.value_grad(pointwise, theta)
            value += 0.5 * float(theta @ (prior * theta))
            grad = grad + prior * theta
            return value * unit, scaling.gradient_to_u(grad) * unit

        def objective(u):
            theta = scaling.to_theta(u)
            value, grad, _ = design.loss_grad(rows, labels, w, theta)
            # Successive evaluations are at nearby parameters: from now on
            # each row's normaliser starts from its previous value.
            rows.warm = True
            value += 0.5 * float(theta @ (prior * theta))
            grad = grad + prior * theta
            return value * unit, scaling.gradient_to_u(grad) * unit

        # In memory, every pass runs on the pass's worker threads with BLAS
        # at one thread; holding that for the whole solve saves resetting
        # BLAS's thread count around each pass.  Out-of-core passes use
        # BLAS's own threads.
        hold = passes_own_threads() if w is not None else contextlib.nullcontext()
        with hold:
            result = minimize(
                objective if w is not None else objective_out_of_core,
                scaling.to_u(theta0),
                jac=True,
                method="L-BFGS-B",
                options={
                    "maxiter": self.max_iter,
                    "gtol": self.tol * n_rows,
                    "ftol": 1e3 * np.finfo(float).eps,
                    "maxcor": 20,
                },
            )
        if not result.success and result.nit >= self.max_iter:
            warnings.warn(
                f"L-BFGS did not converge in {self.max_iter} iterations ({result.message}); "
                "increase max_iter, standardise the features or strengthen prior_scale.",
                ConvergenceWarning,
                stacklevel=2,
            )
        theta = self._canonical(design, scaling.to_theta(result.x))
        W, b = design.split(theta)
        self.coef_ = np.array(W)
        self.intercept_ = np.array(b) if self.fit_intercept else np.zeros(q)
        self.loss_ = float(result.fun) / unit
        self.n_iter_ = int(result.nit)
        return self

    def _previous_parameters(self):
        if not (self.warm_start and hasattr(self, "coef_")):
            return None
        parts = [self.coef_.ravel()]
        if self.fit_intercept:
            parts.append(self.intercept_)
        return np.concatenate(parts)

    def _convex_start(self, design, codes, w, prior):
        """The t1 = t2 = 1 solution: penalised logistic regression by Newton."""
        q = design.q
        lik = BinaryLogistic() if q == 1 else MultinomialLogistic(q)
        y = None if codes is None else (codes.astype(np.float64) if q == 1 else codes)
        T = free_parameter_map(design, self._scale is not None, False)
        problem = NewtonProblem(design, lik, y, w, prior, T)
        out_of_core = getattr(design, "out_of_core", False)
        if not out_of_core and design.n > _CONVEX_START_ROWS:
            # The start only has to land in the right basin: the logistic
            # fit on a row sample (weights rescaled to the full total) does,
            # at a fraction of a full-data Newton solve.
            problem = problem.subsample(_CONVEX_START_ROWS) or problem
        # passes_own_threads: as in the Laplace fit, BLAS stays at one thread
        # for the whole Newton solve (toggling it per pass made each small
        # Cholesky wait ~50 ms for OpenBLAS's threads here).
        with warnings.catch_warnings(), passes_own_threads():
            # Separation or a slow start is harmless here: L-BFGS carries on.
            warnings.simplefilter("ignore")
            result = solve_map(problem, max_iter=50, tol=1e-6, warn=False)
        theta = result.theta
        if not np.all(np.isfinite(theta)):
            return np.zeros(design.p_full)
        # Without a penalty and separated classes the logistic start runs
        # off to large norms; the bounded loss has no use for that.
        if out_of_core:
            x_max = float(np.max(design.stats["colmax"]))
        else:
            # max(|max|, |min|): no temporary the size of X.
            x_max = max(abs(float(design.X.max())), abs(float(design.X.min())))
        limit = 50.0 / max(x_max, 1e-12)
        if np.max(np.abs(theta[: design.n_coef])) > limit:
            theta = theta * (limit / np.max(np.abs(theta[: design.n_coef])))
        return theta

    def _canonical(self, design, theta):
        """Centre the unidentified common shift of a multiclass fit."""
        if design.q == 1:
            return theta
        theta = theta.copy()
        W = theta[: design.n_coef].reshape(design.q, design.d)
        if self._scale is None:
            W -= W.mean(axis=0)
        if design.fit_intercept:
            theta[design.n_coef :] -= theta[design.n_coef :].mean()
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
        scores = self.decision_function(X)
        t2 = float(self.t2)
        if scores.ndim == 1:
            # Both columns from the kernel, not 1 - p1: where p1 rounds to 1
            # the small class-0 probability (a polynomial tail for t2 > 1)
            # would be lost to 0, and predict_log_proba would give -inf.
            return tempered_softmax(np.column_stack([np.zeros_like(scores), scores]), t2)
        return tempered_softmax(scores, t2)

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
