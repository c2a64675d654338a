"""Probit regression: classical maximum likelihood and Bayesian (Laplace)."""

import numpy as np

from ._base import GaussianPosteriorClassifier
from ._checks.params import Options, ParameterTable
from ._fit.likelihoods import BinaryProbit
from ._fit.special import log_ndtr, ndtr


class ProbitClassifier(GaussianPosteriorClassifier):
    """Binary probit regression, P(y = 1 | x) = Phi(x^T w + b).

    The probit model (Bliss, Science 79, 1934; Finney, Probit Analysis,
    1947) read as a latent-variable model: y = 1 exactly when
    x^T w + b + e > 0 with e ~ N(0, 1). The MAP of the weighted
    log-likelihood plus a zero-mean Gaussian prior is found by damped
    Newton with a Cholesky solve (the probit log-likelihood is globally
    concave, so Newton with the observed Hessian converges from zero); the
    posterior is the Gaussian with the Hessian at the MAP as precision
    (Laplace's method). Binary targets only.

    Parameters
    ----------
    prior_scale : float > 0, None or "auto", default="auto"
        Standard deviation of the N(0, prior_scale^2) prior on every slope,
        on the scale of the features as given (standardise them to make one
        scale fit all). "auto" (the default, as in
        ``LaplaceLogisticClassifier``): the scale that maximises the Laplace
        evidence, so that the data, not a convention, set the amount of
        shrinkage, and the fit exists even under separation. None: no prior,
        the classical probit maximum-likelihood estimate; ``posterior_cov_``
        is then the inverse observed information (the negative Hessian of
        the log-likelihood at the estimate). For probit the observed and the
        expected (Fisher) information differ away from the canonical link,
        so these standard errors agree with fits that use the observed
        Hessian (Newton's method) and differ slightly from those of IRLS /
        Fisher scoring, which use the expected information.
    intercept_prior_scale : float > 0 or None, default=None
        Prior sd of the intercept; None is a flat prior.
    fit_intercept : bool, default=True
    predictive : {"exact", "mc", "map"}, default="exact"
        How ``predict_proba`` averages over the posterior. "exact":
        Phi(m / sqrt(1 + v)) with m, v the posterior mean and variance of
        the latent index x^T w + b; it is the exact expectation of
        Phi(x^T w + b) under the Gaussian posterior (E Phi(eta) =
        P(e <= eta) with e ~ N(0, 1) independent, and eta - e ~ N(m, 1 + v)).
        "mc": Monte Carlo over ``n_draws`` posterior draws. "map": plug-in
        Phi(m) at the MAP.
    n_draws : int, default=2000
        Posterior draws for ``predictive="mc"``.
    max_iter : int, default=100
        Newton iterations on the full data.
    tol : float, default=1e-8
        Stop when half the squared Newton decrement (the estimated distance
        of the objective from its minimum, in nats) is below ``tol``.
    random_state : int, RandomState or None, default=None
        Seeds the Monte Carlo draws.

    Attributes
    ----------
    classes_ : ndarray of shape (2,)
    coef_ : ndarray of shape (1, d)
    intercept_ : ndarray of shape (1,)
    posterior_mean_ : ndarray of shape (p,)
        MAP parameters in the order: the d coefficients, then the intercept.
    posterior_cov_ : ndarray of shape (p, p)
        Laplace posterior covariance in that order (with ``prior_scale=None``
        the inverse observed information).
    log_evidence_ : float or None
        Laplace log evidence log p(y | X, prior_scale_); with a flat
        intercept prior defined up to an additive constant that does not
        depend on the prior scale. None when ``prior_scale=None``.
    prior_scale_ : float or None
        The prior scale used (the maximiser when "auto").
    n_iter_ : int
        Passes over all the rows by the solver (Newton iterations; on large
        data also the loss-and-gradient passes of the subsample-metric
        phase), for the chosen prior scale.
    n_features_in_ : int
    feature_names_in_ : ndarray of str, when X had string column names.

    Notes
    -----
    ``logit_moments`` returns the moments of the latent probit index (not a
    logit); ``predict_interval`` gives the exact equal-tailed posterior
    bounds Phi(m -+ z sqrt(v)) of P(y = classes_[1] | x), since that
    probability is a monotone function of the Gaussian index.
    ``decision_function`` is log Phi(t) - log Phi(-t), t = m / sqrt(1 + v)
    (or m for "map"), the log-odds of ``predict_proba``: it ranks rows as
    the probabilities do and stays finite where Phi(t) rounds to 0 or 1.

    The objective is the weighted SUM of the per-row negative
    log-likelihoods plus ||w||^2 / (2 prior_scale^2), so integer
    ``sample_weight`` equals repeated rows and grouped binomial data can be
    fitted as weighted (success, failure) rows.

    Probabilities from this model are a statistical screening aid; where a
    decision affects people (medical, credit, safety), they do not replace
    review by someone who knows the domain.
    """

    binary_only = True
    _parameter_constraints = GaussianPosteriorClassifier._parameter_constraints | ParameterTable(
        {"predictive": Options("exact", "mc", "map")}
    )

    def __init__(
        self,
        *,
        prior_scale="auto",
        intercept_prior_scale=None,
        fit_intercept=True,
        predictive="exact",
        n_draws=2000,
        max_iter=100,
        tol=1e-8,
        random_state=None,
    ):
        self.prior_scale = prior_scale
        self.intercept_prior_scale = intercept_prior_scale
        self.fit_intercept = fit_intercept
        self.predictive = predictive
        self.n_draws = n_draws
        self.max_iter = max_iter
        self.tol = tol
        self.random_state = random_state

    def _make_likelihood(self, n_classes):
        # The base rejects n_classes > 2 before this is reached.
        return BinaryProbit()

    @staticmethod
    def _binary_link(eta):
        return ndtr(eta)

    @staticmethod
    def _binary_argument(mean, var):
        # predict_proba is Phi(t) and Phi(-t) of this t: two ndtr calls
        # instead of the log-odds (two log_ndtr) and two expit.
        return mean / np.sqrt(1.0 + var)

    @staticmethod
    def _binary_decision(mean, var):
        # log-odds of Phi(t): Phi(-t) = 1 - Phi(t) exactly, and log_ndtr of
        # each side keeps the difference finite (about t^2 / 2) in the tails.
        t = mean / np.sqrt(1.0 + var)
        return log_ndtr(t) - log_ndtr(-t)
