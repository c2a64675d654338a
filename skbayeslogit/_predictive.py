"""The posterior API of the Laplace-approximation estimators.

``PosteriorPredictiveMixin`` serves ``GaussianPosteriorClassifier`` (in
``_base``): the latent moments of new rows, the predictive in its three
forms (moderated, Monte Carlo, plug-in), ``predict_interval``,
``coef_table`` and ``sample_coef``. It reads the fitted ``_posterior``
(``_fit.posterior.GaussianPosterior``) through the estimator's
``ParameterLayout``, and the estimator's ``_binary_decision``,
``_binary_link`` and ``_make_likelihood`` hooks.
"""

import numpy as np
from scipy.special import logsumexp
from scipy.stats import norm
from sklearn.utils.validation import check_is_fitted

from ._checks.inputs import MAX_ABS_FEATURE, check_level, check_magnitude, check_positive_int
from ._checks.params import as_generator
from ._fit.column_evidence import estimator_column_evidence
from ._fit.posterior import summary_table
from ._fit.special import expit, log_normalise
from ._kernels.softmax import moderated_softmax_rows
from ._linear.layout import ParameterLayout
from ._linear.sources import dask_aware


class PosteriorPredictiveMixin:
    """Predictions and summaries from a fitted Gaussian posterior (see the module)."""

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
        layout = ParameterLayout.of_estimator(self)
        if layout.q != 1:
            return self._posterior.latent_moments(layout, self._validate_predict_data(X))
        X = self._validate_predict_data(X, check_range=False)
        chunk = None if make_chunk is None else make_chunk(X.shape[0])
        mean, var, in_range = self._posterior.binary_moments(
            layout, X, limit=MAX_ABS_FEATURE, chunk=chunk
        )
        if not in_range:
            check_magnitude(X, per_column=False)  # raises, naming the problem
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
        layout = ParameterLayout.of_estimator(self)
        if self.predictive == "mc":
            return self._mc_decision(layout, self._validate_predict_data(X))
        if layout.q > 1:
            if self.predictive == "map":
                X = self._validate_predict_data(X)
                W, b = layout.split(self._posterior.mean)
                return log_normalise(X @ W.T + b)
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

        self._posterior.multiclass_moments(ParameterLayout.of_estimator(self), X, finish)
        return out

    @dask_aware
    def predict_proba(self, X):
        """Predictive class probabilities, shape (n_samples, n_classes); rows sum to 1.

        Binary models with a Gaussian-moment predictive finish each piece's
        probabilities on the worker threads as soon as its latent moments
        are computed, in one pass over X; the values are those of the
        generic path, ``expit(decision_function(X))``, except for a model
        with a ``_binary_argument`` hook (probit: ``Phi(+-m / sqrt(1 + v))``
        directly, equal to the generic path to rounding).
        """
        check_is_fitted(self, "coef_")
        if self.coef_.shape[0] != 1 and self.predictive == "probit":
            # The moderated log probabilities are normalised already: their
            # exponentials only need the rounding of the sum removed.
            P = np.exp(self._moderated_multiclass(X))
            P /= P.sum(axis=1, keepdims=True)
            return P
        if self.coef_.shape[0] != 1 or self.predictive == "mc":
            return super().predict_proba(X)
        plug_in = self.predictive == "map"
        # A model whose predictive is link(t) for an argument t of the
        # moments (probit: Phi(m / sqrt(1 + v))) says so; the others go
        # through their log-odds.
        argument = getattr(self, "_binary_argument", None)
        P = None

        def make_chunk(n):
            nonlocal P
            P = np.empty((n, 2))
            return finish

        def finish(mean, var, start, stop):
            var = np.zeros_like(var) if plug_in else var
            if argument is not None:
                t = argument(mean, var)
                P[start:stop, 1] = self._binary_link(t)
                P[start:stop, 0] = self._binary_link(np.negative(t, out=t))
                return
            scores = self._binary_decision(mean, var)
            expit(scores, out=P[start:stop, 1])
            np.negative(scores, out=scores)
            expit(scores, out=P[start:stop, 0])

        self._latent(X, make_chunk)
        return P

    def _coef_draws(self, n_draws, random_state):
        return self._posterior.sample(n_draws, as_generator(random_state))

    def _mc_decision(self, layout, X):
        draws = self._coef_draws(self.n_draws, self.random_state)
        lik = self._make_likelihood(2 if layout.q == 1 else layout.q)
        if layout.q == 1:
            slopes, intercepts = layout.slopes(draws), layout.intercepts(draws)
            log_p1 = np.empty(len(X))
            log_p0 = np.empty(len(X))
            for start in range(0, len(X), 4096):
                Xc = X[start : start + 4096]
                eta = Xc @ slopes.T
                if layout.fit_intercept:
                    eta += intercepts[:, 0]
                log_p1[start : start + len(Xc)] = logsumexp(lik.log_prob_positive(eta), axis=1)
                log_p0[start : start + len(Xc)] = logsumexp(lik.log_prob_positive(-eta), axis=1)
            return log_p1 - log_p0
        probs = self._mc_class_probs(layout, X, draws)
        logp = np.log(np.maximum(probs.mean(axis=2), np.finfo(float).tiny))
        return logp - logsumexp(logp, axis=1, keepdims=True)

    def _mc_class_probs(self, layout, X, draws):
        """Softmax probabilities per draw, shape (n, K, n_draws)."""
        out = np.empty((len(X), layout.q, len(draws)))
        for s, theta in enumerate(draws):
            W, b = layout.split(theta)
            eta = X @ W.T
            if layout.fit_intercept:
                eta += b
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
        layout = ParameterLayout.of_estimator(self)
        z = norm.ppf(0.5 + level / 2.0)
        if layout.q == 1:
            mean, var = self._latent(X)
            half = z * np.sqrt(var)
            return self._binary_link(mean - half), self._binary_link(mean + half)
        X = self._validate_predict_data(X)
        draws = self._coef_draws(self.n_draws, self.random_state)
        probs = self._mc_class_probs(layout, X, draws)
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
        table = summary_table(
            self.posterior_mean_, self.posterior_cov_, level, self._parameter_index()
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

    def column_evidence(self, groups=None, X=None, y=None, sample_weight=None):
        """Bayes factor of "no effect" for each column (or group of columns).

        Parameters
        ----------
        groups : dict of str to list of str, optional
            Original column -> the feature names that encode it (e.g. the
            one-hot levels of a categorical column); by default every
            feature alone.
        X, y, sample_weight : optional
            Without data: the closed-form Savage-Dickey ratio of the fitted
            Gaussian posterior (Dickey 1971), accurate while zero lies
            within the posterior's bulk. With the data: the ratio of the
            Laplace evidences with and without each group, refitted at
            ``prior_scale_`` (one fit per group), accurate in the tails too.

        Returns
        -------
        pandas.DataFrame
            One row per group: ``n_parameters``, ``log10_bf_no_effect``
            (positive favours no effect), ``evidence`` (Kass & Raftery's
            verbal scale) and ``method``.
        """
        return estimator_column_evidence(self, groups, X, y, sample_weight)
