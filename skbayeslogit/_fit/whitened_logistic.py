"""The logistic log-likelihood and its gradient directly in whitened Laplace coordinates.

The sampler of ``hmc`` needs, at every leapfrog step, the log-likelihood and
its gradient at a few points u (one per chain), theta(u) = m + u R. For the
binary logistic model the linear predictors are eta = X~ theta = X~ m +
(X~ R^T) u, with X~ = [X, 1] (the intercept column when fitted): with the
n x p_free matrix A = X~ R^T and the offsets X~ m formed once, a step is
one product A U^T, the compiled value-and-derivative kernel and one
product back, A^T G, and the gradient comes out in u. That skips the
general path's parameter layout, per-class blocks and task set-up, which on
a small data set cost as much as the products themselves.

A is as large as X, so it is formed only while it stays small
(``fits_in_memory``); otherwise the sampler keeps the general path.
"""

import numpy as np

from .._kernels.logistic_draws import logistic_value_grad
from .._linear.threads import map_tasks, row_spans

# Largest A formed (entries): 32 MiB.
MAX_ENTRIES = 1 << 22
# Rows x points per block: as the general path's blocks.
_BLOCK_ENTRIES = 32768


def fits_in_memory(draw_likelihood, dim):
    """Whether the binary logistic shortcut applies and its matrix is small enough."""
    return draw_likelihood.is_binary_logistic and draw_likelihood.X.shape[0] * dim <= MAX_ENTRIES


class WhitenedLogistic:
    """sum_i w_i log p(y_i | eta_i(u)) and its gradient in u, for a few points u.

    Parameters
    ----------
    draw_likelihood : DrawLikelihood
        A binary logistic one (its X, labels, weights and layout are used).
    mean : ndarray of shape (p_full,)
    R : ndarray of shape (p_free, p_full)
        theta(u) = mean + u R.
    """

    def __init__(self, draw_likelihood, mean, R):
        lik = draw_likelihood
        X, layout = lik.X, lik.layout
        d = layout.d
        A = np.dot(X, R[:, :d].T)
        offset = np.dot(X, mean[:d])
        if layout.fit_intercept:
            A += R[:, d]
            offset += mean[d]
        self.A = np.ascontiguousarray(A)
        self.offset = offset
        self.y = np.ascontiguousarray(lik.y, dtype=np.float64)
        self.w = lik.w

    def value_grad(self, U):
        """Log-likelihood (C,) and its gradient in u (C, p_free) at the rows of U."""
        n, dim = self.A.shape
        U = np.ascontiguousarray(U, dtype=np.float64)
        C = len(U)
        rows = max(16, min(_BLOCK_ENTRIES // max(C, 1), max(n, 1)))
        tasks = [(first, last, rows) for first, last in row_spans(n, rows)]
        parts = map_tasks(
            lambda f, l, r: self._task(U, f, l, r), tasks, work=float(n) * C * (4.0 * dim + 60.0)
        )
        if len(parts) == 1:
            return parts[0]
        return sum(p[0] for p in parts), sum(p[1] for p in parts)

    def _task(self, U, first, last, rows):
        value = np.zeros(len(U))
        grad = np.zeros(U.shape)
        for start in range(first, last, rows):
            stop = min(start + rows, last)
            A = self.A[start:stop]
            Et = np.dot(U, A.T)
            Et += self.offset[start:stop]
            Gt = np.empty_like(Et)
            logistic_value_grad(Et, self.y[start:stop], self.w[start:stop], value, Gt)
            grad += np.dot(Gt, A)
        return value, grad
