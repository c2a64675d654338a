"""Pointwise likelihoods of the linear predictor.

A likelihood here knows nothing about features or coefficients: it maps the
linear predictor ``eta`` of a block of rows to the weighted negative
log-likelihood, its first derivative ``g`` and its second derivative ``h``
with respect to ``eta``. The design matrix (``_linear.design``) maps these to
coefficient space and the Newton solver (``newton``) does the rest, so a
new model needs one class here and one thin estimator.

Conventions
-----------
Binary likelihoods (``n_outputs == 1``) take ``y`` in {0, 1} (float64, shape
(n,)), ``eta`` of shape (n,) and return ``g`` and ``h`` of shape (n,).
Multiclass likelihoods (``n_outputs == K``) take integer class codes ``y`` of
shape (n,), ``eta`` of shape (n, K) and return ``g`` of shape (n, K) and ``h``
of shape (n, K(K+1)/2): the upper triangle of each row's symmetric K x K
Hessian, pairs in ``np.triu_indices(K)`` order (attribute ``pairs``). All
returned quantities already include the row weights ``w`` (shape (n,),
non-negative).

Each likelihood has ``loss``, ``loss_grad`` (loss and ``g``) and
``derivatives`` (loss, ``g`` and ``h``): the solver's gradient-only passes
(``newton``) call ``loss_grad``, which skips ``h``, the costly part for K
classes (K(K+1)/2 per row).
"""

import numpy as np

from .._kernels.logistic import gradient_span, logistic_derivatives, logistic_loss
from .._kernels.softmax import softmax_rows
from .special import log_expit, log_ndtr, probit_hessian_factor

# log sqrt(2 pi): the normal density is exp(-z^2 / 2 - _HALF_LOG_2PI).
_HALF_LOG_2PI = 0.5 * float(np.log(2.0 * np.pi))

#: -log p(y | eta) below which a row's label counts as fitted with certainty:
#: what an estimate drifting to infinity (separation) produces.
CERTAIN_LOSS = 1e-12


class _SymmetricBinaryLink:
    """Shared by binary likelihoods with p(y | eta) = P(y = 1 | s eta), s = 2y - 1."""

    _certain_margin = None

    @classmethod
    def certain_margin(cls):
        """Signed margin s eta beyond which -log p(y | eta) < ``CERTAIN_LOSS``.

        -log P(y = 1 | z) decreases in z, so one root replaces evaluating the
        log-probability on every row (costly for probit's log Phi). Logit:
        27.6; probit: 7.03.
        """
        if cls._certain_margin is None:
            from scipy.optimize import brentq

            def excess(z):
                return -float(cls.log_prob_positive(np.array([z]))[0]) - CERTAIN_LOSS

            cls._certain_margin = brentq(excess, 0.0, 1e3, xtol=1e-10)
        return cls._certain_margin

    @classmethod
    def fitted_with_certainty(cls, y, eta):
        """Rows whose recorded label has -log p(y | eta) < ``CERTAIN_LOSS`` (bool, (n,))."""
        return np.where(y > 0.5, eta, -eta) > cls.certain_margin()


class BinaryLogistic(_SymmetricBinaryLink):
    """Bernoulli likelihood with the logit link, P(y = 1 | eta) = sigmoid(eta)."""

    n_outputs = 1
    name = "logistic"

    def loss(self, y, eta, w):
        """Weighted sum of -log p(y | eta); a float."""
        # -log p = softplus(eta) - y * eta, exact for either label and any eta;
        # one fused compiled loop (see _kernels.logistic).
        return logistic_loss(y, eta, w)

    def derivatives(self, y, eta, w):
        """Loss sum, g = w (p - y) and h = w p (1 - p), each of shape (n,)."""
        # p (1 - p) is formed as e / (1 + e)^2 with e = exp(-|eta|): no
        # cancellation near p = 1; one exponential per row for all three.
        return logistic_derivatives(y, eta, w)

    def loss_grad(self, y, eta, w):
        """Loss sum and g = w (p - y), shape (n,), without the Hessian factor."""
        # The fused kernel's h costs one multiply a row more than skipping it.
        loss, g, _ = logistic_derivatives(y, eta, w)
        return loss, g

    # The design's gradient pass hands whole row spans to this instead of
    # calling loss_grad block by block (see _kernels.logistic).
    gradient_span = staticmethod(gradient_span)

    @staticmethod
    def log_prob_positive(eta):
        """log P(y = 1 | eta), shape of ``eta``."""
        return log_expit(eta)


class MultinomialLogistic:
    """Categorical likelihood with the softmax link over K linear predictors."""

    name = "softmax"

    def __init__(self, n_classes):
        self.n_outputs = int(n_classes)
        # Class pairs (k, l), k <= l, in np.triu_indices order: the layout of
        # the packed Hessian factor.
        self.pairs = np.triu_indices(self.n_outputs)

    @staticmethod
    def log_softmax(eta):
        """log p, shape (n, K)."""
        shifted = eta - eta.max(axis=1, keepdims=True)
        return shifted - np.log(np.exp(shifted).sum(axis=1, keepdims=True))

    def loss(self, y, eta, w):
        """Weighted sum of -log p(y | eta); a float."""
        logp = self.log_softmax(eta)
        return float(-(w @ logp[np.arange(len(y)), y]))

    def fitted_with_certainty(self, y, eta):
        """Rows whose recorded class has -log p(y | eta) < ``CERTAIN_LOSS`` (bool, (n,))."""
        logp = self.log_softmax(eta)
        return logp[np.arange(len(y)), np.asarray(y).astype(int)] > -CERTAIN_LOSS

    def derivatives(self, y, eta, w):
        """Loss sum, g = w (p - onehot(y)) of shape (n, K), packed h of shape (n, K(K+1)/2).

        h holds the upper triangle (pairs k <= l in ``self.pairs`` order) of
        each row's softmax Hessian w_i (diag(p_i) - p_i p_i^T): the matrix
        is symmetric, and the design's Hessian pass needs exactly these
        K(K+1)/2 entries per row, so the full K x K array is never formed.
        One compiled loop over the rows (``_kernels.softmax``).
        """
        return softmax_rows(y, eta, w, True)

    def loss_grad(self, y, eta, w):
        """Loss sum and g = w (p - onehot(y)), shape (n, K), without h."""
        loss, g, _ = softmax_rows(y, eta, w, False)
        return loss, g


class BinaryProbit(_SymmetricBinaryLink):
    """Bernoulli likelihood with the probit link, P(y = 1 | eta) = Phi(eta).

    With the signed predictor z = s eta, s = 2y - 1, the negative
    log-likelihood of one row is -log Phi(z) (the link is symmetric,
    1 - Phi(eta) = Phi(-eta)), with derivatives in eta

        g = -s lambda(z),    h = lambda(z) (lambda(z) + z),

    lambda = phi / Phi the inverse Mills ratio. h lies in [0, 1): it is
    positive in exact arithmetic and underflows to 0 only for z above about
    38, where phi(z) itself underflows. Every quantity stays finite for
    |eta| up to 1e4 and beyond: log Phi and lambda come from ``log_ndtr``,
    and h from ``probit_hessian_factor``, which avoids the cancellation in
    lambda + z for very negative z.
    """

    n_outputs = 1
    name = "probit"

    def loss(self, y, eta, w):
        """Weighted sum of -log Phi(s eta); a float."""
        # s = 2y - 1 by arithmetic, exact for y in {0, 1}; a few times
        # cheaper than np.where on a boolean mask.
        return float(-(w @ log_ndtr((2.0 * y - 1.0) * eta)))

    def derivatives(self, y, eta, w):
        """Loss sum, g = -w s lambda(s eta) and h = w lambda (lambda + s eta).

        Parameters
        ----------
        y : ndarray of shape (n,), values in {0, 1}
        eta : ndarray of shape (n,)
        w : ndarray of shape (n,), non-negative

        Returns
        -------
        loss : float
        g, h : ndarray of shape (n,); h / w in [0, 1).
        """
        loss, g, z, lam = self._loss_grad_mills(y, eta, w)
        return loss, g, w * probit_hessian_factor(z, lam)

    def loss_grad(self, y, eta, w):
        """Loss sum and g = -w s lambda(s eta), shape (n,), without h."""
        loss, g, _, _ = self._loss_grad_mills(y, eta, w)
        return loss, g

    @staticmethod
    def _loss_grad_mills(y, eta, w):
        """Loss sum, g, the signed predictor z = s eta and lambda(z)."""
        s = 2.0 * y - 1.0
        z = s * eta
        # One log_ndtr serves both the loss and lambda: it is the costly part.
        log_cdf = log_ndtr(z)
        loss = float(-(w @ log_cdf))
        lam = np.exp(-0.5 * z * z - _HALF_LOG_2PI - log_cdf)
        return loss, -(w * s) * lam, z, lam

    @staticmethod
    def log_prob_positive(eta):
        """log P(y = 1 | eta) = log Phi(eta), shape of ``eta``."""
        return log_ndtr(eta)
