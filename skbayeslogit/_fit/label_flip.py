"""The label-flip (contaminated-data) logistic likelihood.

Each recorded label is the true class with probability 1 - rho and, with
probability rho, one of the other classes chosen uniformly. For K classes
with clean softmax probabilities pi(eta),

    P(recorded y = k | eta) = c pi_k + e,    e = rho / (K - 1),  c = 1 - rho - e,

which for K = 2 is the binary model of Copas, "Binary regression models for
contaminated data", JRSS-B 50 (1988) 225-265:
P(y = 1 | eta) = rho + (1 - 2 rho) sigmoid(eta).

Derivatives in eta (per row, weight 1). With r = c pi_y / p_y (in [0, 1];
1 when rho = 0) and u = onehot(y) - pi:

    g = -r u,
    H = r (diag pi - pi pi^T) - r (1 - r) u u^T          (observed),
    C = r (diag pi - pi pi^T) - b u u^T,  b = r min(1 - r, pi_y / (1 - pi_y)).

The likelihood is not log-concave in eta: on rows the model disbelieves
(small r) the negative rank-one term outweighs the first. ``C``, the
curvature the solver climbs with (``derivatives``), keeps the largest share
of that term that leaves each row's matrix positive semi-definite: u lies in
the range of diag pi - pi pi^T with u^T (diag pi - pi pi^T)^+ u =
(1 - pi_y) / pi_y, so r (diag pi - pi pi^T) - beta u u^T stays PSD exactly
for beta <= r pi_y / (1 - pi_y). C equals H wherever H is PSD; for K = 2 (in the one
binary predictor eta = eta_1 - eta_0, pi = sigmoid) it is max(h, 0), the
clipped second derivative. The observed H is what ``observed_derivatives``
returns: the solver finishes with it, and it is the posterior precision at
the MAP.

``log_prob_positive`` is the CLEAN log sigmoid: the model's predictions are
of the true class, and the solver's start (``start_likelihood``) is the
plain logistic MAP, from which the climb begins. The identification check
(``fitted_with_certainty``) asks the clean model too: the recorded-label
likelihood never reaches 1, but a separating direction still drives the
clean probabilities, and the coefficients, to the edge.
"""

import numpy as np

from ..exceptions import InvalidParameterError
from .likelihoods import BinaryLogistic, MultinomialLogistic
from .special import log_expit


def _log_rates(rho, n_classes):
    """(log c, log e) of the model, with log 0 = -inf exactly for rho = 0."""
    e = rho / (n_classes - 1)
    c = 1.0 - rho - e
    log_e = np.log(e) if e > 0 else -np.inf
    return float(np.log(c)), float(log_e)


def check_flip_rate(rho, n_classes):
    """The flip rate as a float in [0, (K - 1) / K), or a one-line error.

    The estimator's parameter table has checked its type and sign already;
    the top depends on the class count, known only in ``fit``.
    """
    rho = float(rho)
    limit = (n_classes - 1) / n_classes
    if not (np.isfinite(rho) and 0.0 <= rho < limit):
        raise InvalidParameterError(
            f"flip_rate must be in [0, {limit:.4g}) for {n_classes} classes "
            f"(below (K - 1) / K, where labels would carry no information); got {rho!r}."
        )
    return rho


class BinaryLabelFlip:
    """Binary label-flip likelihood, P(y = 1 | eta) = rho + (1 - 2 rho) sigmoid(eta).

    Parameters
    ----------
    flip_rate : float in [0, 0.5)
    """

    n_outputs = 1
    name = "labelflip"

    def __init__(self, flip_rate):
        self.flip_rate = check_flip_rate(flip_rate, 2)
        self._log_c, self._log_e = _log_rates(self.flip_rate, 2)
        # rho = 0 is the logistic likelihood: log-concave, no start or polish needed.
        self.log_concave = self.flip_rate == 0.0
        self.start_likelihood = BinaryLogistic()
        self.fitted_with_certainty = self.start_likelihood.fitted_with_certainty

    def _pieces(self, y, eta):
        """Sign s, log p(y), r and the clean probability of the other class."""
        s = 2.0 * y - 1.0
        z = s * eta
        log_own = log_expit(z)  # log pi_y
        log_p = np.logaddexp(self._log_c + log_own, self._log_e)
        r = np.exp(self._log_c + log_own - log_p)
        other = np.exp(log_expit(-z))  # 1 - pi_y, without cancellation
        return s, log_p, r, other

    def loss(self, y, eta, w):
        """Weighted sum of -log p(y | eta); a float."""
        s = 2.0 * y - 1.0
        log_p = np.logaddexp(self._log_c + log_expit(s * eta), self._log_e)
        return float(-(w @ log_p))

    def loss_grad(self, y, eta, w):
        """Loss sum and g = -w s r (1 - pi_y), shape (n,)."""
        s, log_p, r, other = self._pieces(y, eta)
        return float(-(w @ log_p)), -(w * s) * r * other

    def derivatives(self, y, eta, w):
        """Loss, g and the climbing curvature max(h, 0), h the observed second derivative."""
        loss, g, h = self.observed_derivatives(y, eta, w)
        return loss, g, np.maximum(h, 0.0)

    def observed_derivatives(self, y, eta, w):
        """Loss, g and the exact second derivative in eta (may be negative)."""
        s, log_p, r, other = self._pieces(y, eta)
        wr = w * r
        h = wr * other * ((1.0 - other) - (1.0 - r) * other)
        return float(-(w @ log_p)), -(wr * s) * other, h

    def log_prob_positive(self, eta):
        """log of the CLEAN P(true class = 1 | eta) = log sigmoid(eta)."""
        return log_expit(eta)

    def recorded_log_prob(self, log_own):
        """log p(recorded y) from log pi_y, the clean log probability of the recorded label."""
        return np.logaddexp(self._log_c + log_own, self._log_e)

    def recorded_probability(self, p_true):
        """P(recorded label = class 1) from the true-class probability, shape of input."""
        return self.flip_rate + (1.0 - 2.0 * self.flip_rate) * p_true


class MultinomialLabelFlip:
    """K-class label-flip likelihood, P(y = k | eta) = c pi_k(eta) + e.

    Parameters
    ----------
    n_classes : int >= 3
    flip_rate : float in [0, (K - 1) / K)
    """

    name = "labelflip"

    def __init__(self, n_classes, flip_rate):
        self.n_outputs = int(n_classes)
        self.pairs = np.triu_indices(self.n_outputs)
        self.flip_rate = check_flip_rate(flip_rate, self.n_outputs)
        self._log_c, self._log_e = _log_rates(self.flip_rate, self.n_outputs)
        self.log_concave = self.flip_rate == 0.0
        self.start_likelihood = MultinomialLogistic(n_classes)
        self.fitted_with_certainty = self.start_likelihood.fitted_with_certainty

    # The clean softmax (the approximation check's draws read it).
    log_softmax = staticmethod(MultinomialLogistic.log_softmax)

    def _pieces(self, y, eta):
        """log p(y) (n,), r (n,), pi (n, K) and u = onehot(y) - pi (n, K)."""
        log_pi = MultinomialLogistic.log_softmax(eta)
        rows = np.arange(len(y))
        log_own = log_pi[rows, y]
        log_p = np.logaddexp(self._log_c + log_own, self._log_e)
        r = np.exp(self._log_c + log_own - log_p)
        pi = np.exp(log_pi)
        u = -pi
        u[rows, y] += 1.0
        return log_p, r, pi, u

    def loss(self, y, eta, w):
        """Weighted sum of -log p(y | eta); a float."""
        log_own = MultinomialLogistic.log_softmax(eta)[np.arange(len(y)), y]
        return float(-(w @ np.logaddexp(self._log_c + log_own, self._log_e)))

    def loss_grad(self, y, eta, w):
        """Loss sum and g = -w r u, shape (n, K)."""
        log_p, r, _, u = self._pieces(y, eta)
        return float(-(w @ log_p)), -(w * r)[:, None] * u

    def _packed(self, wr, pi, extra=None):
        """Packed upper triangle of wr (diag pi - pi pi^T) [- extra u u^T]."""
        k, l = self.pairs
        h = -wr[:, None] * pi[:, k] * pi[:, l]
        diag = k == l
        h[:, diag] += wr[:, None] * pi
        if extra is not None:
            coef, u = extra
            h -= coef[:, None] * u[:, k] * u[:, l]
        return h

    def derivatives(self, y, eta, w):
        """Loss, g and the packed climbing curvature C (PSD; see the module docstring)."""
        log_p, r, pi, u = self._pieces(y, eta)
        wr = w * r
        own = pi[np.arange(len(y)), y]
        # The largest share of the negative term keeping each row's matrix PSD.
        cut = wr * np.minimum(1.0 - r, own / np.maximum(1.0 - own, np.finfo(float).tiny))
        return float(-(w @ log_p)), -wr[:, None] * u, self._packed(wr, pi, (cut, u))

    def observed_derivatives(self, y, eta, w):
        """Loss, g and the packed exact Hessian in eta (not necessarily PSD)."""
        log_p, r, pi, u = self._pieces(y, eta)
        wr = w * r
        h = self._packed(wr, pi, (wr * (1.0 - r), u))
        return float(-(w @ log_p)), -wr[:, None] * u, h

    def recorded_log_prob(self, log_own):
        """log p(recorded y) from log pi_y, the clean log probability of the recorded label."""
        return np.logaddexp(self._log_c + log_own, self._log_e)

    def recorded_probability(self, p_true):
        """P(recorded label = k) from the true-class probabilities (n, K)."""
        e = self.flip_rate / (self.n_outputs - 1)
        return (1.0 - self.flip_rate - e) * p_true + e


def flip_posterior(p_true_recorded, flip_rate, n_classes):
    """Probability that each recorded label was flipped.

    Parameters
    ----------
    p_true_recorded : ndarray of shape (n,)
        Probability (under the fitted model's predictive) that the row's
        TRUE class is its recorded label.
    flip_rate : float
    n_classes : int

    Returns
    -------
    ndarray of shape (n,), values in [0, 1]
        e (1 - p) / (c p + e): Bayes' rule with the flip as the latent event.
        Both the numerator and denominator are linear in the clean
        probability, so averaging them over the posterior of the
        coefficients replaces p by its predictive mean exactly.
    """
    e = flip_rate / (n_classes - 1)
    c = 1.0 - flip_rate - e
    p = np.clip(p_true_recorded, 0.0, 1.0)
    # c p + e >= e > 0 whenever rho > 0; rho = 0 gives 0 exactly.
    if e == 0.0:
        return np.zeros_like(p)
    return e * (1.0 - p) / (c * p + e)
