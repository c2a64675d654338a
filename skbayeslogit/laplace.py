"""Bayesian logistic regression by the Laplace approximation."""

import numpy as np

from ._base import GaussianPosteriorClassifier
from ._checks.params import Options, ParameterTable
from ._fit.likelihoods import BinaryLogistic, MultinomialLogistic
from ._fit.special import expit


class LaplaceLogisticClassifier(GaussianPosteriorClassifier):
    """Bayesian logistic regression (binary and softmax multiclass), Laplace posterior.

    The MAP of the weighted log-likelihood plus a zero-mean Gaussian prior is
    found by damped Newton with a Cholesky solve; the posterior is the
    Gaussian with the Hessian at the MAP as precision (Laplace's method;
    MacKay, Neural Computation 4, 1992; Bishop, Pattern Recognition and
    Machine Learning, 2006, Sec. 4.5). Predictions average the likelihood
    over that posterior.

    Parameters
    ----------
    prior_scale : float > 0, None or "auto", default="auto"
        Standard deviation of the N(0, prior_scale^2) prior on every slope.
        The prior acts on the scale of the features as given: standardise
        them (for example with StandardScaler in a Pipeline) to make one
        scale fit all. None: no prior, the maximum-likelihood estimate, with
        the observed-information covariance. "auto": the scale that
        maximises the Laplace evidence (grid, then bounded Brent on log10).
    intercept_prior_scale : float > 0 or None, default=None
        Prior sd of the intercept(s); None is a flat prior.
    fit_intercept : bool, default=True
    predictive : {"probit", "mc", "map"}, default="probit"
        How ``predict_proba`` averages over the posterior. "probit": the
        moderated output sigma(kappa(v) m), kappa(v) = (1 + pi v / 8)^(-1/2)
        (MacKay 1992; Spiegelhalter & Lauritzen 1990) with m, v the latent
        mean and variance; for K > 2 classes the pairwise mean-field form of
        Lu, Ie & Sha (2020), see ``_moderated_softmax_log``. "mc": Monte
        Carlo over ``n_draws`` posterior draws. "map": plug-in probabilities
        at the MAP (no averaging).
    n_draws : int, default=2000
        Posterior draws for ``predictive="mc"`` and the multiclass
        ``predict_interval``.
    max_iter : int, default=100
        Newton iterations on the full data.
    tol : float, default=1e-8
        Stop when half the squared Newton decrement (the estimated distance
        of the objective from its minimum, in nats) is below ``tol``.
    random_state : int, RandomState or None, default=None
        Seeds the Monte Carlo draws.

    Attributes
    ----------
    classes_ : ndarray of shape (K,)
    coef_ : ndarray of shape (1, d) (binary) or (K, d)
    intercept_ : ndarray of shape (1,) or (K,)
        For K > 2 with a slope prior and a flat intercept prior the
        intercepts sum to zero (their common shift is not identified); with
        ``prior_scale=None`` the first class is the reference (its
        coefficients and intercept are 0).
    posterior_mean_ : ndarray of shape (p,)
        MAP parameters in the order: coefficient row(s), then intercept(s).
    posterior_cov_ : ndarray of shape (p, p)
        Laplace posterior covariance in that order (singular along the
        constrained directions for K > 2 as described above).
    log_evidence_ : float or None
        Laplace log evidence log p(y | X, prior_scale_). With a flat
        intercept prior it is defined up to an additive constant that does
        not depend on the prior scale. None when ``prior_scale=None``.
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
    The objective is the weighted SUM of the per-row negative
    log-likelihoods plus ||w||^2 / (2 prior_scale^2), so integer
    ``sample_weight`` equals repeated rows and the MAP equals scikit-learn's
    ``LogisticRegression(C=prior_scale**2)`` with an unpenalised intercept.

    Probabilities from this model are a statistical screening aid; where a
    decision affects people (medical, credit, safety), they do not replace
    review by someone who knows the domain.
    """

    _parameter_constraints = GaussianPosteriorClassifier._parameter_constraints | ParameterTable(
        {"predictive": Options("probit", "mc", "map")}
    )

    def __init__(
        self,
        *,
        prior_scale="auto",
        intercept_prior_scale=None,
        fit_intercept=True,
        predictive="probit",
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
        return BinaryLogistic() if n_classes == 2 else MultinomialLogistic(n_classes)

    @staticmethod
    def _binary_link(eta):
        return expit(eta)

    @staticmethod
    def _binary_decision(mean, var):
        # logit(sigma(kappa m)) = kappa m exactly: no rounding through sigma.
        return mean / np.sqrt(1.0 + np.pi * var / 8.0)
