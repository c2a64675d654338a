"""The exact log posterior of a fitted linear model, in whitened Laplace coordinates.

The Laplace posterior is N(m, R^T R) with R = L^{-1} T^T (``posterior``):
theta = m + R^T u maps standard normal u to it. In u the Laplace
approximation is N(0, I), so the log posterior there is what both the
importance weights (target over N(0, I)) and the sampler (identity metric
in u, that is the Laplace covariance as the metric in theta) need. The
Jacobian of the map is constant and drops out.
"""

import numpy as np

from .whitened_logistic import WhitenedLogistic, fits_in_memory


class WhitenedPosterior:
    """log p(theta(u) | y) up to a constant, theta(u) = mean + u @ R.

    Parameters
    ----------
    draw_likelihood : DrawLikelihood
    prior_precision : ndarray of shape (p_full,)
        Precision of the independent zero-mean Gaussian prior of each
        parameter (0 for a flat prior), as the estimator's fit used it.
    mean : ndarray of shape (p_full,)
        The MAP.
    R : ndarray of shape (p_free, p_full)
    """

    def __init__(self, draw_likelihood, prior_precision, mean, R):
        self.draw_likelihood = draw_likelihood
        self.prior_precision = np.asarray(prior_precision, dtype=np.float64)
        self.mean = np.asarray(mean, dtype=np.float64)
        self.R = np.asarray(R, dtype=np.float64)
        self.dim = self.R.shape[0]
        self._whitened = None
        # The log prior is quadratic in u: -0.5 u Q u^T - u . c - const, with
        # Q = R P R^T and c = R P m (P the diagonal prior precision).
        scaled = self.R * self.prior_precision
        self._prior_Q = np.dot(scaled, self.R.T)
        self._prior_c = np.dot(scaled, self.mean)
        self._prior_const = 0.5 * np.dot(self.mean * self.mean, self.prior_precision)

    def to_theta(self, U):
        """Parameters (S, p_full) of whitened points U (S, p_free)."""
        return self.mean + np.dot(U, self.R)

    def _log_prior(self, thetas):
        return -0.5 * np.dot(thetas * thetas, self.prior_precision)

    def log_density(self, U):
        """Log posterior (up to a constant) at each row of U; shape (S,)."""
        thetas = self.to_theta(U)
        return self.draw_likelihood.log_likelihood(thetas) + self._log_prior(thetas)

    def value_grad(self, U):
        """Log posterior and its gradient in u at each row of U (few rows)."""
        if self._whitened is None and fits_in_memory(self.draw_likelihood, self.dim):
            self._whitened = WhitenedLogistic(self.draw_likelihood, self.mean, self.R)
        if self._whitened is not None:
            value, grad_u = self._whitened.value_grad(U)
            prior_grad = np.dot(U, self._prior_Q)
            prior_grad += self._prior_c
            value -= 0.5 * np.einsum("ij,ij->i", U, prior_grad + self._prior_c)
            value -= self._prior_const
            return value, grad_u - prior_grad
        thetas = self.to_theta(U)
        value, grad = self.draw_likelihood.value_grad(thetas)
        value = value + self._log_prior(thetas)
        grad = grad - thetas * self.prior_precision
        return value, np.dot(grad, self.R.T)
