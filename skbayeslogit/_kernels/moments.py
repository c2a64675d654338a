"""Compiled loop for the latent moments of a binary model's prediction.

For a row x with x~ = (x, 1) (or x alone without an intercept), the latent
predictor eta = theta^T x~ under the Gaussian posterior N(m, R^T R) has

    mean = m^T x~,    var = ||R x~||^2,

with R = L^{-1} lower triangular (``_fit.posterior``). The kernel computes both
for a span of rows in one read of X, and checks the values it reads against
the prediction's magnitude limit on the way, so that ``predict_proba`` reads
X once instead of twice (once for the range check, once for the product).

Layout: rows of X are transposed into a small block (features down, rows
across), so every inner loop runs along rows: it vectorises without any
reordering of sums, and each row's terms are added in the same fixed order
whatever the block or thread. Term k of R x~ only has the leading columns
where R is nonzero (R is triangular), so the loop stops there: 250 of 440
products a row at d = 20 with an intercept, the mean's included.

It is faster than a range scan plus one multi-threaded BLAS product of X
with [R^T, m] per chunk, too skinny a product for BLAS's blocking (figures
in benchmarks/README.md).

Tried without gain: two terms per sweep sharing the loads of the block.
"""

import numpy as np

from .config import lazy_kernel, numpy_first

_BLOCK_ROWS = 256  # rows per transposed block: four feature rows and the sums stay in L1
# The transposed block's rows are 8 doubles longer than the block: at a
# 4 KiB stride (512 rows) the stores of one row of X all map to the same
# L1 sets, and the transpose slowed down several times.
_PAD = 8


def _binary_moments(X, coef_t, lengths, shift, limit, mean, var, xt, acc):  # pragma: no cover
    # coef_t (p + 1, d): rows k < p are R[k, :d], the last is m[:d]; only the
    # first lengths[k] entries of row k are used. shift (p + 1,): the
    # intercept column. xt (d, >= block): the transposed block; acc (block,).
    # Returns True when some |x| exceeds limit or is NaN.
    n, d = X.shape
    terms = coef_t.shape[0]
    block = acc.shape[0]
    bad = False
    for b0 in range(0, n, block):
        m = min(block, n - b0)
        for i in range(m):
            row = X[b0 + i]
            for j in range(d):
                v = row[j]
                xt[j, i] = v
                # NaN fails the comparison too.
                bad |= not (abs(v) <= limit)
        var_b = var[b0 : b0 + m]
        for i in range(m):
            var_b[i] = 0.0
        for k in range(terms):
            length = lengths[k]
            s = shift[k]
            for i in range(m):
                acc[i] = s
            j = 0
            while j + 4 <= length:
                c0 = coef_t[k, j]
                c1 = coef_t[k, j + 1]
                c2 = coef_t[k, j + 2]
                c3 = coef_t[k, j + 3]
                x0 = xt[j]
                x1 = xt[j + 1]
                x2 = xt[j + 2]
                x3 = xt[j + 3]
                for i in range(m):
                    acc[i] += (c0 * x0[i] + c1 * x1[i]) + (c2 * x2[i] + c3 * x3[i])
                j += 4
            while j < length:
                c0 = coef_t[k, j]
                x0 = xt[j]
                for i in range(m):
                    acc[i] += c0 * x0[i]
                j += 1
            if k < terms - 1:
                for i in range(m):
                    var_b[i] += acc[i] * acc[i]
            else:
                mean_b = mean[b0 : b0 + m]
                for i in range(m):
                    mean_b[i] = acc[i]
    return bad


def _moments_signature():
    from numba import types

    matrix = types.Array(types.float64, 2, "C", readonly=True)
    vector = types.Array(types.float64, 1, "C", readonly=True)
    counts = types.Array(types.int64, 1, "C", readonly=True)
    out = types.float64[::1]
    scratch = types.float64[:, ::1]
    return types.boolean(matrix, matrix, counts, vector, types.float64, out, out, scratch, out)


_moments_kernel = lazy_kernel(_binary_moments, _moments_signature)


class BinaryMomentPlan:
    """The fixed inputs of the moment kernel for one posterior.

    Parameters
    ----------
    R : ndarray of shape (p, p)
        Lower triangular, ``var = ||R x~||^2``; columns ``0..d-1`` are the
        features, column ``d`` (when ``p == d + 1``) the intercept.
    mean : ndarray of shape (p,)
        Posterior mean, same layout.
    d : int
        Number of features.
    """

    def __init__(self, R, mean, d):
        p = R.shape[0]
        coef_t = np.empty((p + 1, d))
        coef_t[:p] = R[:, :d]
        coef_t[p] = mean[:d]
        shift = np.zeros(p + 1)
        if p > d:
            shift[:p] = R[:, d]
            shift[p] = mean[d]
        # Leading columns up to the last nonzero one: exact zeros (above R's
        # diagonal) add nothing, and skipping them changes no sum.
        nonzero = coef_t != 0.0
        last = d - np.argmax(nonzero[:, ::-1], axis=1)
        self.lengths = np.where(nonzero.any(axis=1), last, 0).astype(np.int64)
        self.coef_t = coef_t
        self.shift = shift
        self.d = d
        #: Multiply-adds per row, to decide whether a pass is threaded.
        self.work = float(self.lengths.sum())

    def run(self, X, mean, var, limit):
        """Fill ``mean`` and ``var`` (shape (m,)) for the rows of X (m, d).

        Returns True when some entry of X is NaN or has magnitude above
        ``limit`` (the outputs are then not to be used).
        """
        if numpy_first(X.shape[0]):
            return self._run_numpy(X, mean, var, limit)
        block = _BLOCK_ROWS
        xt = np.empty((self.d, block + _PAD))
        acc = np.empty(block)
        return bool(
            _moments_kernel(
                X, self.coef_t, self.lengths, self.shift, float(limit), mean, var, xt, acc
            )
        )

    def _run_numpy(self, X, mean, var, limit):
        # The kernel's sums by BLAS, for calls too small to pay for its compile.
        # Like the kernel, NaN or infinite rows give unused outputs, silently.
        with np.errstate(all="ignore"):
            mean[:] = np.dot(X, self.coef_t[-1]) + self.shift[-1]
            lin = np.dot(X, self.coef_t[:-1].T) + self.shift[:-1]
            var[:] = np.einsum("ij,ij->i", lin, lin)
        return not bool(np.all(np.abs(X) <= limit))
