"""Log-likelihood (and gradient) of many parameter vectors over the rows of X.

The self-check evaluates the exact log-likelihood of S posterior draws at
once: the linear predictors of a block of rows under all draws are one
matrix product, X_block (m x d) times the d x S matrix of draws, so X is read
once for all draws and an n x S array is never formed. Row spans run as
tasks on the package's worker threads (``_linear.threads.map_tasks``), split
by ``row_spans`` as the design's passes are, and their per-draw sums are
added in task order (the result does not depend on the number of threads).

The logistic likelihood takes a compiled path (``_kernels.logistic_draws``);
the others call the likelihood objects of ``likelihoods`` on each block.
"""

import numpy as np

from .._kernels.logistic_draws import logistic_value_grad, softplus_sums
from .._linear.threads import map_tasks, row_spans

# Entries of one block of predictors (rows x draws): 256 KiB, in L2 with the
# block of X and the draws.
_BLOCK_ENTRIES = 32768


def draw_matrix(layout, thetas):
    """Slopes of S parameter vectors as one (d, S q) matrix, and the intercepts (S q,).

    Column s q + k of the matrix holds the slopes of class k under draw s,
    so that X @ matrix + intercepts are the predictors of every (draw,
    class) pair, draw by draw.

    Parameters
    ----------
    layout : ParameterLayout
    thetas : ndarray of shape (S, p_full)
    """
    S, q, d = len(thetas), layout.q, layout.d
    coef = layout.slopes(thetas).reshape(S, q, d)
    B = np.ascontiguousarray(coef.transpose(2, 0, 1).reshape(d, S * q))
    if layout.fit_intercept:
        b = np.ascontiguousarray(layout.intercepts(thetas)).reshape(S * q)
    else:
        b = np.zeros(S * q)
    return B, b


class DrawLikelihood:
    """Exact log-likelihood of parameter vectors, for a fitted model's layout.

    Parameters
    ----------
    X : ndarray of shape (n, d), float64, C order
        The feature matrix, never written to.
    layout : ParameterLayout
        Where each parameter sits in the vectors.
    likelihood : object
        A likelihood of ``likelihoods`` (binary: ``log_prob_positive``;
        multiclass: ``log_softmax``; both: ``loss_grad``). One whose
        recorded label is not drawn from that link directly (the label-flip
        model) maps the link's log probability of the recorded label to the
        label's log-likelihood with ``recorded_log_prob``.
    y : ndarray of shape (n,)
        Binary: float labels in {0, 1}; multiclass: int64 class codes.
    w : ndarray of shape (n,)
        Row weights.
    """

    def __init__(self, X, layout, likelihood, y, w):
        self.X = X
        self.layout = layout
        self.likelihood = likelihood
        self.y = y
        self.w = np.ascontiguousarray(w, dtype=np.float64)
        self._logistic = layout.q == 1 and getattr(likelihood, "name", "") == "logistic"
        #: Binary logistic: the compiled paths (and the sampler's shortcut) apply.
        self.is_binary_logistic = self._logistic
        self._recorded = getattr(likelihood, "recorded_log_prob", None) or (lambda log_p: log_p)
        if layout.q == 1:
            self._sign = 2.0 * np.asarray(y, dtype=np.float64) - 1.0

    def _run(self, task, columns, extra_work):
        """Run ``task(first, last, rows)`` over row spans; the list of results in row order."""
        n = self.X.shape[0]
        rows = max(16, min(_BLOCK_ENTRIES // max(columns, 1), max(n, 1)))
        tasks = [(first, last, rows) for first, last in row_spans(n, rows)]
        work = float(n) * columns * (2.0 * self.layout.d + extra_work)
        return map_tasks(task, tasks, work=work)

    def log_likelihood(self, thetas):
        """sum_i w_i log p(y_i | x_i, theta_s), shape (S,), for each row theta_s of ``thetas``.

        ``thetas`` (S, p_full) may hold many draws: X is read once for all.
        """
        thetas = np.ascontiguousarray(thetas, dtype=np.float64)
        S, q = len(thetas), self.layout.q
        if self.X.shape[0] == 0:
            return np.zeros(S)
        B, b = draw_matrix(self.layout, thetas)
        if self._logistic:
            parts = self._run(lambda f, l, r: self._logistic_task(B, b, f, l, r), S, 30.0)
            abs_sum = sum(p[0] for p in parts)
            log_sum = sum(p[1] for p in parts)
            # log p(y | t) = (y - 1/2) t - |t| / 2 - log(1 + exp(-|t|)): the
            # first term is linear in theta, one product with X for all draws.
            centred = self.w * (np.asarray(self.y, dtype=np.float64) - 0.5)
            linear = np.dot(B.T, np.dot(self.X.T, centred)) + b * float(centred.sum())
            return linear - 0.5 * abs_sum - log_sum
        if q == 1:
            parts = self._run(lambda f, l, r: self._binary_task(B, b, f, l, r), S, 60.0)
        else:
            parts = self._run(lambda f, l, r: self._multi_task(B, b, f, l, r), S * q, 30.0)
        return np.sum(parts, axis=0)

    def _blocks(self, B, b, first, last, rows):
        """(start, stop, predictors) of each block of rows in [first, last)."""
        X = self.X
        buf = np.empty(min(rows, last - first) * B.shape[1])
        for start in range(first, last, rows):
            stop = min(start + rows, last)
            E = buf[: (stop - start) * B.shape[1]].reshape(stop - start, B.shape[1])
            np.dot(X[start:stop], B, out=E)
            E += b
            yield start, stop, E

    def _logistic_task(self, B, b, first, last, rows):
        abs_sum = np.zeros(B.shape[1])
        log_sum = np.zeros(B.shape[1])
        for start, stop, E in self._blocks(B, b, first, last, rows):
            softplus_sums(E, self.w[start:stop], abs_sum, log_sum)
        return abs_sum, log_sum

    def _binary_task(self, B, b, first, last, rows):
        total = np.zeros(B.shape[1])
        for start, stop, E in self._blocks(B, b, first, last, rows):
            E *= self._sign[start:stop, None]
            log_p = self._recorded(self.likelihood.log_prob_positive(E))
            total += np.dot(self.w[start:stop], log_p)
        return total

    def _multi_task(self, B, b, first, last, rows):
        q = self.layout.q
        S = B.shape[1] // q
        total = np.zeros(S)
        for start, stop, E in self._blocks(B, b, first, last, rows):
            m = stop - start
            E3 = E.reshape(m, S, q)
            top = E3.max(axis=2, keepdims=True)
            lse = np.log(np.exp(E3 - top).sum(axis=2)) + top[:, :, 0]
            picked = E3[np.arange(m), :, self.y[start:stop]]
            total += np.dot(self.w[start:stop], self._recorded(picked - lse))
        return total

    def value_grad(self, thetas):
        """Log-likelihood and its gradient in theta for a few parameter vectors.

        Parameters
        ----------
        thetas : ndarray of shape (C, p_full)

        Returns
        -------
        value : ndarray of shape (C,)
        grad : ndarray of shape (C, p_full)
        """
        thetas = np.ascontiguousarray(thetas, dtype=np.float64)
        layout, C = self.layout, len(thetas)
        B, b = draw_matrix(layout, thetas)
        parts = self._run(lambda f, l, r: self._grad_task(B, b, f, l, r), C * layout.q, 60.0)
        value = sum(p[0] for p in parts)
        g_coef = sum(p[1] for p in parts)  # (C, q, d)
        grad = np.empty((C, layout.p_full))
        layout.slopes(grad)[:] = g_coef.reshape(C, layout.n_coef)
        layout.intercepts(grad)[:] = sum(p[2] for p in parts) if layout.fit_intercept else 0.0
        return value, grad

    def _grad_task(self, B, b, first, last, rows):
        lik, q, d = self.likelihood, self.layout.q, self.layout.d
        C = B.shape[1] // q
        value = np.zeros(C)
        g_coef = np.zeros((C, q, d))
        g_int = np.zeros((C, q))
        if self._logistic:
            return self._logistic_grad_task(B, b, first, last, rows, value, g_coef, g_int)
        for start, stop, E in self._blocks(B, b, first, last, rows):
            m = stop - start
            w_b, y_b = self.w[start:stop], self.y[start:stop]
            # The likelihood's own derivative pass, over the m C (row, vector)
            # pairs flattened; its g is d(-log p)/d eta.
            if q == 1:
                y_rep, w_rep = np.repeat(y_b, C), np.repeat(w_b, C)
                _, g = lik.loss_grad(y_rep, E.ravel(), w_rep)
                G = -g.reshape(m, C, 1)
                log_p = lik.log_prob_positive(E * self._sign[start:stop, None])
                value += np.dot(w_b, self._recorded(log_p))
            else:
                flat = E.reshape(m * C, q)
                _, g = lik.loss_grad(np.repeat(y_b, C), flat, np.repeat(w_b, C))
                G = -g.reshape(m, C, q)
                logp = lik.log_softmax(flat).reshape(m, C, q)
                value += np.dot(w_b, self._recorded(logp[np.arange(m), :, y_b]))
            Xb = self.X[start:stop]
            g_coef += np.dot(G.reshape(m, C * q).T, Xb).reshape(C, q, d)
            g_int += G.sum(axis=0)
        return value, g_coef, g_int

    def _logistic_grad_task(self, B, b, first, last, rows, value, g_coef, g_int):
        """The logistic case: predictors as (vectors x rows), so the kernel runs along rows."""
        X = self.X
        Bt = np.ascontiguousarray(B.T)
        for start in range(first, last, rows):
            stop = min(start + rows, last)
            Xb = X[start:stop]
            Et = np.dot(Bt, Xb.T)
            Et += b[:, None]
            Gt = np.empty_like(Et)
            logistic_value_grad(Et, self.y[start:stop], self.w[start:stop], value, Gt)
            g_coef[:, 0, :] += np.dot(Gt, Xb)
            g_int[:, 0] += Gt.sum(axis=1)
        return value, g_coef, g_int
