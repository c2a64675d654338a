"""Bayesian logistic regression for labels recorded with random flips."""

from functools import partial

import numpy as np

from ._base import GaussianPosteriorClassifier
from ._checks.params import NonNegativeFloat, Options, ParameterTable
from ._fit.hyperparameter import LikelihoodSearch
from ._fit.label_flip import BinaryLabelFlip, MultinomialLabelFlip, flip_posterior
from ._fit.special import expit
from .exceptions import InvalidParameterError

# Candidate flip rates for flip_rate="auto", as fractions of the largest
# allowed rate (K - 1) / K (0.5 for binary): dense near 0, where clean data
# put the maximum, and up to 0.4 for binary data.
_RATE_GRID = np.array([0.0, 0.02, 0.05, 0.1, 0.2, 0.3, 0.45, 0.6, 0.8])


def _flip_likelihood(n_classes, flip_rate):
    if n_classes == 2:
        return BinaryLabelFlip(flip_rate)
    return MultinomialLabelFlip(n_classes, flip_rate)


class LabelFlipLogisticClassifier(GaussianPosteriorClassifier):
    """Logistic regression whose recorded labels were flipped at random, Laplace posterior.

    Each recorded label is the true class with probability 1 - rho and one
    of the other K - 1 classes, uniformly, with probability rho:

        P(recorded y = k | x) = (1 - rho) pi_k(x) + rho (1 - pi_k(x)) / (K - 1),

    pi(x) the clean sigmoid (binary) or softmax of x^T w + b. For K = 2 this
    is rho + (1 - 2 rho) sigmoid(x^T w + b), the contaminated-data model of
    Copas, "Binary regression models for contaminated data", JRSS-B 50
    (1988). A mislabelled row then costs at most -log(rho / (K - 1)), so it
    cannot drag the coefficients far, and the model still carries a
    posterior: the coefficient intervals, predictive averaging and evidence
    of ``LaplaceLogisticClassifier``, which it equals at ``flip_rate=0``.

    The likelihood is not log-concave in the coefficients. The MAP is found
    by damped Newton from the plain logistic MAP, climbing with a positive
    semi-definite curvature (the observed one with its negative part cut
    row by row) and finishing with the observed Hessian, which is the
    posterior precision at the MAP; a warning says so should it not be
    positive definite there.

    Parameters
    ----------
    flip_rate : float or "auto", default="auto"
        rho, in [0, 0.5) for binary and [0, (K - 1) / K) for K classes.
        "auto": chosen with the prior scale by maximising the Laplace
        evidence (needs a proper prior, so ``prior_scale`` must not be
        None), and its uncertainty carried into the posterior: see Notes.
    prior_scale : float > 0, None or "auto", default="auto"
        Standard deviation of the N(0, prior_scale^2) prior on every slope,
        on the scale of the features as given (standardise them). "auto":
        chosen by the Laplace evidence, together with an "auto" flip rate.
    intercept_prior_scale : float > 0 or None, default=None
        Prior sd of the intercept(s); None is a flat prior.
    fit_intercept : bool, default=True
    predictive : {"probit", "mc", "map"}, default="probit"
        How ``predict_proba`` averages the CLEAN class probabilities over
        the posterior, as in ``LaplaceLogisticClassifier``.
    n_draws : int, default=2000
        Posterior draws for ``predictive="mc"`` and the multiclass
        ``predict_interval``.
    max_iter : int, default=100
    tol : float, default=1e-8
        Stop when half the squared decrement in the solver's curvature is
        below ``tol`` (nats).
    random_state : int, RandomState or None, default=None
        Seeds the Monte Carlo draws.

    Attributes
    ----------
    flip_rate_ : float
        The flip rate used (the evidence maximiser when "auto").
    flip_rate_sd_ : float
        The rate's posterior sd on the averaging grid when "auto"; 0.0 for
        a given rate.
    classes_, coef_, intercept_, posterior_mean_, posterior_cov_,
    log_evidence_, prior_scale_, n_iter_, n_features_in_, feature_names_in_
        As in ``LaplaceLogisticClassifier``; ``log_evidence_`` is at
        ``flip_rate_`` and ``prior_scale_``. With ``flip_rate="auto"``,
        ``posterior_mean_`` (and ``coef_``, ``intercept_``) and
        ``posterior_cov_`` are the moments of the posterior averaged over
        the rate (Notes), not the MAP at ``flip_rate_``.

    Notes
    -----
    ``predict_proba`` is the probability of the TRUE class, the clean
    sigmoid or softmax averaged over the posterior; ``predict_recorded_proba``
    is that of the label as it would be recorded, flips included.
    ``flip_probability(X, y)`` gives, for each row, the posterior
    probability that its recorded label was flipped. Both use ``flip_rate_``
    as a plug-in value.

    With ``flip_rate="auto"`` the coefficients' posterior does not treat the
    fitted rate as known (which made their intervals too narrow): at the
    chosen prior scale, with a uniform prior on the rate's range, the
    Laplace posteriors at a grid of rates around ``flip_rate_`` (about one
    posterior sd of the rate apart, out to where the evidence has fallen by
    6 nats) are mixed with weights proportional to their evidence, and the
    mixture is reported moment-matched, a Gaussian with its mean and
    covariance: Bayesian model averaging over the rate on a grid
    (``_fit.hyperparameter``).

    Probabilities and flip probabilities from this model are a statistical
    screening aid; where a decision affects people (medical, credit,
    safety), they do not replace review by someone who knows the domain.
    """

    _parameter_constraints = GaussianPosteriorClassifier._parameter_constraints | ParameterTable(
        {
            "flip_rate": NonNegativeFloat(allow_auto=True),
            "predictive": Options("probit", "mc", "map"),
        }
    )

    def __init__(
        self,
        *,
        flip_rate="auto",
        prior_scale="auto",
        intercept_prior_scale=None,
        fit_intercept=True,
        predictive="probit",
        n_draws=2000,
        max_iter=100,
        tol=1e-8,
        random_state=None,
    ):
        self.flip_rate = flip_rate
        self.prior_scale = prior_scale
        self.intercept_prior_scale = intercept_prior_scale
        self.fit_intercept = fit_intercept
        self.predictive = predictive
        self.n_draws = n_draws
        self.max_iter = max_iter
        self.tol = tol
        self.random_state = random_state

    def _check_params(self):
        checked = super()._check_params()
        if checked["flip_rate"] == "auto" and self._prior_scale is None:
            raise InvalidParameterError(
                "flip_rate='auto' is chosen by the Laplace evidence, which needs a proper "
                "prior: set prior_scale to a float or 'auto', or give flip_rate a value."
            )
        self._flip_rate = checked["flip_rate"]
        return checked

    def _make_likelihood(self, n_classes):
        # The class count sets the rate's top; the likelihood checks it.
        return _flip_likelihood(n_classes, 0.0 if self._flip_rate == "auto" else self._flip_rate)

    def _likelihood_search(self, n_classes):
        if self._flip_rate != "auto":
            return None
        top = (n_classes - 1) / n_classes
        return LikelihoodSearch(partial(_flip_likelihood, n_classes), top * _RATE_GRID, top)

    def check_approximation(self, X, y, sample_weight=None, **options):
        """Compare the Laplace posterior with the exact one at a given flip rate.

        As ``LaplaceLogisticClassifier.check_approximation`` (the same
        options), for a model fitted with a given ``flip_rate``: with
        "auto" the reported posterior is a mixture over rates, not a
        Laplace fit at one rate, and there is no single exact posterior to
        check it against.

        Raises
        ------
        ValueError
            When ``flip_rate`` was "auto".
        """
        if self._flip_rate == "auto":
            raise InvalidParameterError(
                "check_approximation checks a Laplace fit at one flip rate, and with "
                "flip_rate='auto' the posterior is averaged over rates; refit with "
                "flip_rate=<model>.flip_rate_ to check the fit at that rate."
            )
        return super().check_approximation(X, y, sample_weight, **options)

    @staticmethod
    def _binary_link(eta):
        return expit(eta)

    @staticmethod
    def _binary_decision(mean, var):
        # The clean predictive, moderated as in the Laplace model.
        return mean / np.sqrt(1.0 + np.pi * var / 8.0)

    def fit(self, X, y, sample_weight=None):
        """Find the flip rate, the MAP, the Laplace posterior and the evidence.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
            The recorded labels.
        sample_weight : array-like of shape (n_samples,), optional
            Non-negative frequency weights (the objective is their weighted sum).

        Returns
        -------
        self
        """
        super().fit(X, y, sample_weight)
        chosen = self._hyperparameter
        self.flip_rate_, self.flip_rate_sd_ = (self._flip_rate, 0.0) if chosen is None else chosen
        return self

    def _prob_true_is_recorded(self, X, y):
        """Predictive probability that each row's TRUE class is its recorded label."""
        P = self.predict_proba(X)
        n = P.shape[0]
        y = np.asarray(y)
        if y.shape != (n,):
            raise ValueError(f"y must have shape ({n},); got {y.shape}.")
        index = np.clip(np.searchsorted(self.classes_, y), 0, len(self.classes_) - 1)
        unknown = self.classes_[index] != y
        if np.any(unknown):
            bad = sorted({str(v) for v in y[unknown]})[:5]
            raise ValueError(f"y has labels not seen in fit: {', '.join(bad)}.")
        return P[np.arange(n), index]

    def predict_recorded_proba(self, X):
        """Predictive probabilities of the label as it would be RECORDED, flips included.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)

        Returns
        -------
        ndarray of shape (n_samples, n_classes)
            (1 - rho) P + rho (1 - P) / (K - 1) with P = ``predict_proba(X)``
            (exact under the posterior, the recorded probability being
            linear in the clean one); rows sum to 1.
        """
        P = self.predict_proba(X)
        e = self.flip_rate_ / (len(self.classes_) - 1)
        return (1.0 - self.flip_rate_ - e) * P + e

    def flip_probability(self, X, y):
        """Posterior probability that each row's recorded label was flipped.

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
            The recorded labels, from ``classes_``.

        Returns
        -------
        ndarray of shape (n_samples,), values in [0, 1]
            e (1 - p) / ((1 - rho - e) p + e), e = rho / (K - 1), with p the
            predictive probability (``predict_proba``) that the true class
            is the recorded one. 0 when ``flip_rate_`` is 0.
        """
        p = self._prob_true_is_recorded(X, y)
        return flip_posterior(p, self.flip_rate_, len(self.classes_))

    def label_doubt(self, X, y):
        """How strongly the model doubts each recorded label (``doubtful_labels``' score).

        Parameters
        ----------
        X : array-like of shape (n_samples, n_features)
        y : array-like of shape (n_samples,)
            The recorded labels, from ``classes_``.

        Returns
        -------
        ndarray of shape (n_samples,)
            -log p, p the predictive probability that the TRUE class is the
            recorded label, in nats (>= 0). It ranks rows exactly as
            ``flip_probability`` does when ``flip_rate_ > 0`` (that is a
            decreasing function of p), and still ranks them when the fitted
            rate is 0, where every flip probability is 0.
        """
        p = self._prob_true_is_recorded(X, y)
        return -np.log(np.maximum(p, np.finfo(float).tiny))
