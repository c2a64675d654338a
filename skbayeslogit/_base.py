"""Shared classifier base: label encoding, parameter layout, the posterior API.

The checks of parameters and inputs live in ``_validation.py``.

Two bases live here:

``LinearClassifierBase``
    What every estimator of the package shares: validation of X, y and
    ``sample_weight`` with messages that name the problem, label encoding,
    feature names, and the split of the parameter vector into ``coef_`` and
    ``intercept_``.

``GaussianPosteriorClassifier``
    The Laplace-approximation machinery for models fitted by the shared
    Newton solver (the Laplace logistic and the probit classifiers): MAP fit,
    ``prior_scale="auto"`` by the Laplace evidence, the posterior API
    (``logit_moments``, ``predict_interval``, ``coef_table``,
    ``sample_coef``) and the predictive. A subclass supplies the likelihood
    and the binary predictive through two hooks.
"""

import warnings

import numpy as np
import pandas as pd
from scipy.optimize import minimize_scalar
from scipy.special import logsumexp
from scipy.stats import norm
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.utils import check_random_state
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import _check_sample_weight, check_is_fitted, validate_data

from ._checks.inputs import (
    _MAX_ABS_FEATURE,
    _as_labels,
    _check_magnitude,
    _plain,
    _reject_non_numeric_frame,
    _reject_unusable_array,
    check_bool,
    check_level,
    check_options,
    check_positive_float,
    check_positive_int,
    check_scale,
    encode_labels,
)
from ._fit.newton import NewtonProblem, solve_map
from ._fit.posterior import GaussianPosterior
from ._fit.special import expit
from ._kernels.softmax import moderated_softmax_rows
from ._linear.design import LinearDesign
from ._linear.sources import dask_aware, fit_design, is_out_of_core
from ._linear.threads import passes_own_threads
from .exceptions import CollinearityWarning, SeparationWarning

LOG_2PI = float(np.log(2.0 * np.pi))


class LinearClassifierBase(ClassifierMixin, BaseEstimator):
    """Validation, label encoding and parameter layout for linear classifiers."""

    #: Binary-only models set this to True.
    _binary_only = False

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        if self._binary_only:
            tags.classifier_tags.multi_class = False
        return tags

    # -- input -------------------------------------------------------------
    def _validate_fit_data(self, X, y, sample_weight):
        """Checked float64 X (never a modified caller array), codes, weights.

        Returns
        -------
        X : ndarray (n, d), float64, C order
        y_codes : ndarray (n,), int64 codes into ``classes_``
        w : ndarray (n,), float64, non-negative with a positive sum
        """
        _reject_non_numeric_frame(X)
        _reject_unusable_array(X)
        y = _as_labels(y)
        if sample_weight is not None:
            _reject_unusable_array(sample_weight, "sample_weight")
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
        _check_magnitude(X)
        if y.dtype.kind not in "biu":
            # Integer or boolean 1-D labels are always class labels; the
            # check (a second sort of y) is for floats and objects.
            check_classification_targets(y)
        self.classes_, y_codes = encode_labels(y)
        n_classes = len(self.classes_)
        if n_classes < 2:
            raise ValueError(
                f"y contains only one class ({_plain(self.classes_[0])!r}); a classifier needs "
                "at least two classes."
            )
        if self._binary_only and n_classes > 2:
            raise ValueError("Only binary classification is supported.")
        if sample_weight is None:
            w = np.ones(X.shape[0])
        else:
            w = _check_sample_weight(sample_weight, X, dtype=np.float64, ensure_non_negative=True)
            w = np.array(w, dtype=np.float64)  # our own copy, whatever was passed
            if not np.all(np.isfinite(w)):
                raise ValueError("sample_weight contains NaN or infinity.")
            if w.sum() <= 0:
                raise ValueError("sample_weight sums to zero; at least one row needs weight > 0.")
            present = np.unique(y_codes[w > 0])
            if len(present) < 2:
                raise ValueError(
                    "only one class has positive sample_weight "
                    f"({_plain(self.classes_[present[0]])!r}); a classifier needs at least two "
                    "classes."
                )
        return X, y_codes, w

    def _validate_predict_data(self, X, check_range=True):
        """X as a C-ordered float64 array, or a clear error.

        ``check_range=False`` leaves out the NaN/inf/magnitude scan, for
        callers whose own pass over X checks the same (the binary moments).
        """
        check_is_fitted(self, "coef_")
        _reject_non_numeric_frame(X)
        _reject_unusable_array(X)
        X = validate_data(
            self, X, reset=False, dtype=np.float64, order="C", ensure_all_finite=False
        )
        if check_range:
            _check_magnitude(X, per_column=False)
        return X

    # -- naming ------------------------------------------------------------
    def _feature_names(self):
        names = getattr(self, "feature_names_in_", None)
        if names is not None:
            return [str(n) for n in names]
        return [f"x{j}" for j in range(self.n_features_in_)]

    def _parameter_index(self):
        """Index of the full parameter vector: coef rows, then intercepts."""
        feats = self._feature_names()
        q = self.coef_.shape[0]
        if q == 1:
            names = feats + (["intercept"] if self.fit_intercept else [])
            return pd.Index(names, name="parameter")
        classes = [str(c) for c in self.classes_]
        tuples = [(c, f) for c in classes for f in feats]
        if self.fit_intercept:
            tuples += [(c, "intercept") for c in classes]
        return pd.MultiIndex.from_tuples(tuples, names=["class", "parameter"])

    def _set_coef(self, design, theta):
        W, b = design.split(theta)
        self.coef_ = np.array(W)
        self.intercept_ = np.array(b) if self.fit_intercept else np.zeros(design.q)

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
        return _log_normalise(scores)

    @dask_aware
    def predict_proba(self, X):
        """Predictive class probabilities, shape (n_samples, n_classes); rows sum to 1."""
        scores = self.decision_function(X)
        if scores.ndim == 1:
            p1 = expit(scores)
            return np.column_stack([expit(-scores), p1])
        P = np.exp(_log_normalise(scores))
        return P / P.sum(axis=1, keepdims=True)


_SEPARATION_SUBSET_ROWS = 2_000  # rows of the first, small linear program


def _binary_separation(X, y, w, fit_intercept, margin=None):
    """True when some direction v separates the classes (weakly).

    The maximum-likelihood estimate of a binary GLM with a monotone link
    fails to exist exactly when a nonzero v has s_i x_i^T v >= 0 for every
    row (s_i = +1 for class 1, -1 for class 0) with at least one strict
    inequality (Albert & Anderson, Biometrika 71, 1984). The linear program
    max sum_i s_i x_i^T v subject to those constraints and |v_j| <= 1 finds
    such a v when its optimum is positive (Konis, "Linear programming
    algorithms for detecting separated data in binary logistic regression
    models", DPhil thesis, Oxford, 2007).

    On large data the linear program over all rows is slow (6 s at
    n = 1e5, d = 50). A subset of rows settles most cases first: if the
    rows with the smallest fitted margins ``margin`` (s_i eta_i, shape (n,))
    admit no such v and have full column rank, then no v != 0 has
    s_i x_i^T v >= 0 even on them, so none does on all rows. Only when the
    subset is separable (or rank deficient) is the full program solved.
    """
    from scipy.optimize import linprog

    keep = w > 0
    A = X[keep]
    if fit_intercept:
        A = np.column_stack([A, np.ones(len(A))])
    scale = np.max(np.abs(A), axis=0)
    A = A / np.where(scale > 0, scale, 1.0)
    S = A * np.where(y[keep] > 0.5, 1.0, -1.0)[:, None]

    def separable(rows):
        res = linprog(
            -rows.sum(axis=0), A_ub=-rows, b_ub=np.zeros(len(rows)), bounds=(-1, 1), method="highs"
        )
        return bool(res.status == 0 and -res.fun > 1e-7 * len(rows))

    if margin is not None and len(S) > 2 * _SEPARATION_SUBSET_ROWS:
        closest = np.argpartition(margin[keep], _SEPARATION_SUBSET_ROWS)[:_SEPARATION_SUBSET_ROWS]
        subset = S[closest]
        if np.linalg.matrix_rank(subset) == S.shape[1] and not separable(subset):
            return False
    return separable(S)


def _perfect_margin(likelihood, tail):
    """Signed margin s eta beyond which -log p(y | eta) < ``tail`` (binary).

    Binary links here are symmetric, p(y | eta) = P(y = 1 | s eta) with
    s = 2y - 1, and -log P(y = 1 | z) decreases in z, so one root replaces
    evaluating the log-probability on every row (costly for probit's
    log Phi). Logit: 27.6; probit: 7.03 for tail = 1e-12.
    """
    from scipy.optimize import brentq

    def excess(z):
        return -float(likelihood.log_prob_positive(np.array([z]))[0]) - tail

    return brentq(excess, 0.0, 1e3, xtol=1e-10)


def free_parameter_map(design, slope_prior, intercept_prior):
    """T with full = T @ free, or None for the identity (``ParameterLayout.free_map``)."""
    return design.layout.free_map(slope_prior, intercept_prior)


def _row_logsumexp(z):
    """log sum exp over the last axis, shifted by its maximum."""
    top = z.max(axis=-1, keepdims=True)
    e = np.exp(z - top)
    return np.log(e.sum(axis=-1)) + top[..., 0]


def _log_normalise(logp):
    """logp - logsumexp(logp) along the rows of an (n, K) array."""
    return logp - _row_logsumexp(logp)[:, None]


class GaussianPosteriorClassifier(LinearClassifierBase):
    """Base of the models fitted by Newton MAP plus a Laplace posterior.

    Subclasses define ``_make_likelihood(n_classes)``, ``_binary_decision``
    (log-odds of the predictive given the latent mean and variance) and
    ``_predictive_options``.
    """

    _predictive_options = ("map", "mc")

    # -- hooks ---------------------------------------------------------------
    def _make_likelihood(self, n_classes):  # pragma: no cover - abstract
        raise NotImplementedError

    def _binary_decision(self, mean, var):  # pragma: no cover - abstract
        raise NotImplementedError

    # -- fitting ---------------------------------------------------------------
    def _check_params(self):
        self._prior_scale = check_scale("prior_scale", self.prior_scale, allow_auto=True)
        self._intercept_scale = check_scale("intercept_prior_scale", self.intercept_prior_scale)
        check_positive_int("max_iter", self.max_iter)
        check_positive_float("tol", self.tol)
        check_options("predictive", self.predictive, self._predictive_options)
        check_positive_int("n_draws", self.n_draws)
        check_bool("fit_intercept", self.fit_intercept)

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
        if is_out_of_core(X, y, sample_weight):
            # Memory-mapped or dask input: the same solver over a design whose
            # passes run block by block where the data are (see _sources).
            design = fit_design(self, X, y, sample_weight, self.fit_intercept)
            X = y_fit = w = None
            n_classes = len(self.classes_)
            q = design.q
        else:
            X, y_codes, w = self._validate_fit_data(X, y, sample_weight)
            n_classes = len(self.classes_)
            q = 1 if n_classes == 2 else n_classes
            design = LinearDesign(X, q, self.fit_intercept)
            y_fit = y_codes.astype(np.float64) if q == 1 else y_codes
        likelihood = self._make_likelihood(n_classes)
        free_map = self._free_map(design)

        def fit_at(scale, phi0=None, warn=True):
            prior = self._prior_precision(design, scale)
            problem = NewtonProblem(design, likelihood, y_fit, w, prior, free_map)
            result = solve_map(problem, phi0, max_iter=self.max_iter, tol=self.tol, warn=warn)
            return result, self._log_evidence(design, problem, result, scale)

        with passes_own_threads():
            if self._prior_scale == "auto":
                scale, result, log_ev = self._maximise_evidence(X, w, fit_at, design)
            else:
                scale = self._prior_scale
                result, log_ev = fit_at(scale)

            self.prior_scale_ = scale
            self.log_evidence_ = log_ev
            self.n_iter_ = result.n_iter
            self._set_coef(design, result.theta)
            self._posterior = GaussianPosterior(result.theta, result.chol, free_map)
            self.posterior_mean_ = result.theta.copy()
            self.posterior_cov_ = self._posterior.cov
            self._check_identification(design, likelihood, y_fit, w, result, X)
        return self

    def _free_map(self, design):
        return free_parameter_map(
            design, self._prior_scale is not None, self._intercept_scale is not None
        )

    def _prior_precision(self, design, scale):
        prec = np.zeros(design.p_full)
        if scale is not None:
            prec[: design.n_coef] = 1.0 / scale**2
        if design.fit_intercept and self._intercept_scale is not None:
            prec[design.n_coef :] = 1.0 / self._intercept_scale**2
        return prec

    def _log_evidence(self, design, problem, result, scale):
        """Laplace log evidence log p(y | X, prior_scale).

        log Z = -E(theta*) + (p/2) log(2 pi) - (1/2) log det H
                - sum over proper-prior parameters of (1/2) log(2 pi s^2),
        with E the penalised objective at the MAP and p the number of free
        parameters (MacKay 1992; Bishop 2006, eq. 4.137). With a flat
        intercept prior the evidence is defined up to an additive constant
        that does not depend on ``prior_scale``; it is None without a slope
        prior (improper prior, no evidence).
        """
        if scale is None:
            return None
        log_det = 2.0 * float(np.sum(np.log(np.diag(result.chol))))
        # Every slope has the proper N(0, scale^2) prior (the free map only
        # ever constrains intercepts when a slope prior is set).
        const = -0.5 * design.n_coef * (LOG_2PI + 2.0 * np.log(scale))
        if design.fit_intercept and self._intercept_scale is not None:
            const += -0.5 * design.q * (LOG_2PI + 2.0 * np.log(self._intercept_scale))
        return float(-result.objective + 0.5 * problem.p_free * LOG_2PI - 0.5 * log_det + const)

    def _maximise_evidence(self, X, w, fit_at, design=None):
        """prior_scale maximising the Laplace evidence, on a log scale.

        A coarse grid of nine scales, a decade apart around 1 / (median
        weighted feature sd), brackets the maximum; bounded Brent on
        log10(scale) within one decade either side of the best grid point
        refines it. Each fit starts from the nearest earlier solution.

        When the smallest scale wins, the data do not support any slope
        (the evidence keeps rising as the prior squeezes them to zero, as for
        pure-noise labels); that scale is returned as is, without a warning.
        When the largest wins, the evidence may keep rising beyond the range
        (typical of separated classes), and a warning says so.
        """
        if getattr(design, "out_of_core", False):
            sd = design.column_moments()[1]
        else:
            mean = np.average(X, axis=0, weights=w)
            sd = np.sqrt(np.average((X - mean) ** 2, axis=0, weights=w))
        sd = sd[sd > 0]
        ref = 1.0 / float(np.median(sd)) if len(sd) else 1.0
        centre = np.log10(ref)
        grid = centre + np.arange(-4.0, 5.0)
        cache = {}

        def neg_log_ev(u):
            if u in cache:
                return -cache[u][1]
            nearest = min(cache, key=lambda v: abs(v - u)) if cache else None
            phi0 = None if nearest is None else cache[nearest][0].phi
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                result, log_ev = fit_at(10.0**u, phi0, warn=False)
            cache[u] = (result, log_ev)
            return -log_ev

        values = [neg_log_ev(u) for u in grid]
        best = int(np.argmin(values))
        if best > 0:
            lo, hi = grid[best - 1], grid[min(best + 1, len(grid) - 1)]
            minimize_scalar(neg_log_ev, bounds=(lo, hi), method="bounded", options={"xatol": 1e-3})
        u_best = min(cache, key=lambda v: -cache[v][1])
        if u_best >= grid[-1] - 1e-6:
            warnings.warn(
                "the Laplace evidence is still rising at the largest prior_scale searched "
                f"({10.0 ** grid[-1]:.3g}), as it does when the classes are (nearly) "
                "separated; prior_scale_ is that edge. Check for separation, standardise "
                "the features, or pass a prior_scale.",
                UserWarning,
                stacklevel=3,
            )
        scale = 10.0**u_best
        # Refit at the chosen scale with warnings on, so a real convergence
        # problem is reported.
        result, log_ev = fit_at(scale, cache[u_best][0].phi, warn=True)
        return scale, result, log_ev

    # -- identification checks ---------------------------------------------
    def _check_identification(self, design, likelihood, y, w, result, X):
        if self._prior_scale is not None:
            return
        self._warn_collinear(result)
        # A recorded label fitted with probability 1 - 1e-12 or closer is what
        # an estimate drifting to infinity produces (separation).
        if getattr(design, "out_of_core", False):
            # One more pass counts those rows. The linear-programming
            # confirmation needs X in memory; for binary models a diverging
            # Newton iteration stands in for it (well-separated but
            # identified fits have such rows too), so the warning says "may".
            margin = _perfect_margin(likelihood, 1e-12) if design.q == 1 else None
            perfect = design.count_perfect(likelihood, result.theta, margin)
            if perfect and (design.q > 1 or not result.converged):
                warnings.warn(
                    "the maximum-likelihood estimate may not exist (likely separation: "
                    f"{perfect} row(s) are fitted with probability 1 to within 1e-12). The "
                    "reported coefficients and intervals may be meaningless; set "
                    "prior_scale (a float or 'auto').",
                    SeparationWarning,
                    stacklevel=3,
                )
            return
        if design.q == 1:
            margin = np.where(y > 0.5, result.eta, -result.eta)
            perfect_rows = margin > _perfect_margin(likelihood, 1e-12)
        else:
            logp = likelihood._log_softmax(result.eta)
            perfect_rows = logp[np.arange(len(y)), y.astype(int)] > -1e-12
        perfect = int(np.sum(perfect_rows & (w > 0)))
        if perfect == 0:
            return
        confirmed = design.q == 1 and _binary_separation(
            X, y, w, design.fit_intercept, margin if design.q == 1 else None
        )
        if design.q > 1 or confirmed:
            kind = "complete or quasi-complete separation" if confirmed else "likely separation"
            warnings.warn(
                f"the maximum-likelihood estimate does not exist ({kind}: {perfect} "
                "row(s) are fitted with probability 1 to within 1e-12, and the "
                "coefficients grow without bound). The reported coefficients and "
                "intervals are meaningless; set prior_scale (a float or 'auto').",
                SeparationWarning,
                stacklevel=3,
            )

    def _warn_collinear(self, result):
        L = result.chol
        H = L @ L.T
        dscale = np.sqrt(np.diag(H))
        Hs = H / np.outer(dscale, dscale)
        eigval, eigvec = np.linalg.eigh(Hs)
        ratio = eigval[0] / eigval[-1]
        if result.jitter == 0.0 and ratio > 1e-10:
            return
        names = list(self._parameter_index())
        if self.coef_.shape[0] > 1:
            names = [f"{c}:{p}" for c, p in names]
            # The reference class's parameters are not free.
            keep = [i for i, v in enumerate(self._free_name_mask()) if v]
            names = [names[i] for i in keep]
        v = np.abs(eigvec[:, 0])
        involved = [names[i] for i in np.argsort(-v) if v[i] > 0.1][:6]
        msg = (
            "the features are (nearly) linearly dependent without a prior: the "
            f"Hessian's scaled condition number is {1 / max(ratio, 1e-300):.2g}; "
            f"the dependence involves {', '.join(involved)}. Drop or combine these "
            "columns, or set prior_scale."
        )
        if result.jitter > 0.0 or ratio < 1e-14:
            raise ValueError(msg)
        warnings.warn(msg, CollinearityWarning, stacklevel=4)

    def _free_name_mask(self):
        q, d = self.coef_.shape
        mask = [k > 0 for k in range(q) for _ in range(d)]
        if self.fit_intercept:
            mask += [k > 0 for k in range(q)]
        return mask

    # -- posterior API ---------------------------------------------------------
    def _design_for_predict(self):
        q, d = self.coef_.shape
        return LinearDesign(np.empty((0, d)), q, self.fit_intercept)

    def _latent(self, X, make_chunk=None):
        """Validate X and return its latent moments (see ``logit_moments``).

        Binary models check X's range (NaN, inf, magnitude) inside their
        compiled moment pass, which reads X once instead of twice; should
        the check fail, the usual scan runs and raises its error.
        ``make_chunk(n)``, binary only, is called with the validated row
        count and returns the ``chunk`` callback of
        ``GaussianPosterior.binary_moments``.
        """
        check_is_fitted(self, "coef_")
        design = self._design_for_predict()
        if design.q != 1:
            return self._posterior.latent_moments(design, self._validate_predict_data(X))
        X = self._validate_predict_data(X, check_range=False)
        chunk = None if make_chunk is None else make_chunk(X.shape[0])
        mean, var, in_range = self._posterior.binary_moments(
            design, X, limit=_MAX_ABS_FEATURE, chunk=chunk
        )
        if not in_range:
            _check_magnitude(X, per_column=False)  # raises, naming the problem
            raise ValueError("X has NaN, infinite or too large values.")  # pragma: no cover
        return mean, var

    @dask_aware
    def logit_moments(self, X):
        """Posterior mean and (co)variance of the latent linear predictor.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        mean : ndarray of shape (n_samples,) (binary) or (n_samples, K)
        var : ndarray of shape (n_samples,) (binary: variance) or
            (n_samples, K, K) (multiclass: covariance of the K predictors)
        """
        return self._latent(X)

    @dask_aware
    def decision_function(self, X):
        """Scores that rank exactly as ``predict_proba``.

        Binary: the log-odds of the predictive probability of ``classes_[1]``,
        shape (n_samples,). Multiclass: the log predictive probabilities,
        shape (n_samples, K).
        """
        check_is_fitted(self, "coef_")
        design = self._design_for_predict()
        if self.predictive == "mc":
            return self._mc_decision(design, self._validate_predict_data(X))
        if design.q > 1:
            if self.predictive == "map":
                X = self._validate_predict_data(X)
                return _log_normalise(design.linear_predictor(self._posterior.mean, X))
            return self._moderated_multiclass(X)
        mean, var = self._latent(X)
        if self.predictive == "map":
            # The plug-in is the predictive with zero variance; the hook
            # maps it to log-odds for links other than the logit.
            return self._binary_decision(mean, np.zeros_like(var))
        return self._binary_decision(mean, var)

    def _moderated_multiclass(self, X):
        """Log of the moderated softmax, the multiclass analogue of sigma(kappa m).

        Approximates E[softmax(eta)]_k for eta ~ N(mean, cov) by the
        pairwise mean-field form of Lu, Ie & Sha, "Mean-field approximation
        to Gaussian-softmax integral with application to uncertainty
        estimation" (arXiv:2006.07584, 2020):

            p_k ~ 1 / sum_j exp(-(m_k - m_j) / sqrt(1 + pi/8 * s_kj)),

        with s_kj the variance of eta_k - eta_j (their mean-field version
        uses s_kk + s_jj; using the variance of the difference keeps the
        posterior correlation between classes, and for K = 2 reduces exactly
        to the binary sigma(kappa(v) m)). The K values are then renormalised
        to sum to one. Computed piece by piece (``moderated_softmax_rows``),
        never holding the (n, K, K) covariances of all rows.

        Returns
        -------
        ndarray of shape (n_samples, K): normalised log probabilities.
        """
        X = self._validate_predict_data(X)
        out = np.empty((X.shape[0], self.coef_.shape[0]))

        def finish(mean_c, pairs_c, start, stop):
            moderated_softmax_rows(mean_c, pairs_c, out[start:stop])

        self._posterior.multiclass_moments(self._design_for_predict(), X, finish)
        return out

    @dask_aware
    def predict_proba(self, X):
        """Predictive class probabilities, shape (n_samples, n_classes); rows sum to 1.

        Binary models with a Gaussian-moment predictive finish each piece's
        probabilities on the worker threads as soon as its latent moments
        are computed, in one pass over X; the values are those of the
        generic path, ``expit(decision_function(X))``.
        """
        check_is_fitted(self, "coef_")
        if self.coef_.shape[0] != 1 or self.predictive == "mc":
            return super().predict_proba(X)
        plug_in = self.predictive == "map"
        P = None

        def make_chunk(n):
            nonlocal P
            P = np.empty((n, 2))
            return finish

        def finish(mean, var, start, stop):
            scores = self._binary_decision(mean, np.zeros_like(var) if plug_in else var)
            expit(scores, out=P[start:stop, 1])
            np.negative(scores, out=scores)
            expit(scores, out=P[start:stop, 0])

        self._latent(X, make_chunk)
        return P

    def _coef_draws(self, n_draws, random_state):
        rng = check_random_state(random_state)
        # numpy Generator from the legacy RandomState seed, for standard_normal speed.
        gen = np.random.default_rng(rng.randint(0, 2**31 - 1))
        return self._posterior.sample(n_draws, gen)

    def _mc_decision(self, design, X):
        draws = self._coef_draws(self.n_draws, self.random_state)
        lik = self._make_likelihood(2 if design.q == 1 else design.q)
        if design.q == 1:
            log_p1 = np.empty(len(X))
            log_p0 = np.empty(len(X))
            for start in range(0, len(X), 4096):
                Xc = X[start : start + 4096]
                eta = Xc @ draws[:, : design.d].T
                if design.fit_intercept:
                    eta += draws[:, design.d]
                log_p1[start : start + len(Xc)] = logsumexp(lik.log_prob_positive(eta), axis=1)
                log_p0[start : start + len(Xc)] = logsumexp(lik.log_prob_positive(-eta), axis=1)
            return log_p1 - log_p0
        probs = self._mc_class_probs(design, X, draws)
        logp = np.log(np.maximum(probs.mean(axis=2), np.finfo(float).tiny))
        return logp - logsumexp(logp, axis=1, keepdims=True)

    def _mc_class_probs(self, design, X, draws):
        """Softmax probabilities per draw, shape (n, K, n_draws)."""
        q, d, nc = design.q, design.d, design.n_coef
        out = np.empty((len(X), q, len(draws)))
        for s, theta in enumerate(draws):
            W = theta[:nc].reshape(q, d)
            eta = X @ W.T
            if design.fit_intercept:
                eta += theta[nc:]
            eta -= eta.max(axis=1, keepdims=True)
            P = np.exp(eta)
            out[:, :, s] = P / P.sum(axis=1, keepdims=True)
        return out

    @dask_aware
    def predict_interval(self, X, level=0.9):
        """Equal-tailed credible bounds for the class probabilities.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        level : float in (0, 1)
            Posterior probability inside the bounds.

        Returns
        -------
        lower, upper : ndarray
            Binary: shape (n_samples,), bounds of P(y = classes_[1] | x) under
            the Gaussian posterior; exact quantiles, because the probability is
            a monotone function of the Gaussian latent predictor.
            Multiclass: shape (n_samples, K), Monte Carlo quantiles over
            ``n_draws`` posterior draws (seeded by ``random_state``).
        """
        level = check_level(level)
        check_is_fitted(self, "coef_")
        design = self._design_for_predict()
        z = norm.ppf(0.5 + level / 2.0)
        if design.q == 1:
            mean, var = self._latent(X)
            half = z * np.sqrt(var)
            return self._binary_link(mean - half), self._binary_link(mean + half)
        X = self._validate_predict_data(X)
        draws = self._coef_draws(self.n_draws, self.random_state)
        probs = self._mc_class_probs(design, X, draws)
        alpha = (1.0 - level) / 2.0
        return np.quantile(probs, alpha, axis=2), np.quantile(probs, 1.0 - alpha, axis=2)

    def coef_table(self, level=0.9):
        """Posterior summary of every parameter.

        Parameters
        ----------
        level : float in (0, 1)

        Returns
        -------
        pandas.DataFrame
            One row a parameter, indexed by feature name and "intercept"
            (multiclass: a (class, parameter) MultiIndex). Columns:
            ``estimate`` (posterior mean = MAP), ``sd`` (posterior standard
            deviation), ``lower`` and ``upper`` (equal-tailed credible
            bounds at ``level``), ``sign_prob`` (posterior probability that
            the parameter has the sign of its estimate, Phi(|m| / sd); a
            posterior quantity, not a p-value). With ``prior_scale=None``
            the spread is the maximum-likelihood standard error from the
            observed information and the bounds are Wald intervals.
        """
        level = check_level(level)
        check_is_fitted(self, "coef_")
        mean = self.posterior_mean_
        sd = np.sqrt(np.maximum(np.diag(self.posterior_cov_), 0.0))
        z = norm.ppf(0.5 + level / 2.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(sd > 0, np.abs(mean) / sd, np.inf)
        table = pd.DataFrame(
            {
                "estimate": mean,
                "sd": sd,
                "lower": mean - z * sd,
                "upper": mean + z * sd,
                "sign_prob": norm.cdf(ratio),
            },
            index=self._parameter_index(),
        )
        table.attrs["level"] = level
        return table

    def sample_coef(self, n, random_state=None):
        """Draws from the Gaussian posterior over the parameters.

        Parameters
        ----------
        n : int
            Number of draws.
        random_state : int, RandomState or None

        Returns
        -------
        ndarray of shape (n, n_parameters)
            Columns in the order of ``posterior_mean_``: the coefficient
            row(s), then the intercept(s).
        """
        check_is_fitted(self, "coef_")
        n = check_positive_int("n", n)
        return self._coef_draws(n, random_state)
