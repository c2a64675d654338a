"""Column statistics of a feature matrix: weighted moments and value ranges.

The weighted moments serve the prior-scale search's reference scale, the
standardising wrapper and the data sources' merged block statistics (one
formula, see :func:`weighted_sums`); the range scans serve the checks of X
(``_checks.inputs.check_magnitude``) and the designs' ``column_max_abs``.
"""

import numpy as np

from .threads import map_tasks, row_spans

_MOMENT_BLOCK_BYTES = 1 << 20  # rows per block of the centred squares: ~1 MiB


def weighted_sums(X, w=None):
    """Weight total, weighted mean and weighted centred sum of squares of each column.

    Parameters
    ----------
    X : ndarray of shape (n, d), float64
    w : ndarray of shape (n,) or None
        Non-negative row weights; None weighs every row 1.

    Returns
    -------
    total : float
    mean : ndarray of shape (d,)
        Zeros when ``total`` is not positive.
    m2 : ndarray of shape (d,)
        sum_i w_i (x_ij - mean_j)^2, computed block by block (no temporary
        the size of X).
    """
    n, d = X.shape
    w = np.ones(n) if w is None else np.asarray(w, dtype=np.float64)
    total = float(w.sum())
    m2 = np.zeros(d)
    if not total > 0:
        return total, np.zeros(d), m2
    mean = np.dot(w, X) / total
    rows = max(1, _MOMENT_BLOCK_BYTES // (8 * max(d, 1)))
    for start in range(0, n, rows):
        block = X[start : start + rows] - mean
        np.square(block, out=block)
        m2 += np.dot(w[start : start + rows], block)
    return total, mean, m2


def moments_from_sums(total, mean, m2, centred=True):
    """Column centre and spread from :func:`weighted_sums`' (or merged) sums.

    ``centred``: the weighted mean and the weighted sd (ddof = 0). Otherwise
    zeros and the weighted root mean square, sqrt(sd^2 + mean^2).
    """
    var = np.maximum(m2, 0.0) / total
    if centred:
        return mean, np.sqrt(var)
    return np.zeros_like(mean), np.sqrt(var + mean**2)


def column_moments(X, w=None, centred=True):
    """Weighted column centre and spread of X (see :func:`moments_from_sums`)."""
    return moments_from_sums(*weighted_sums(X, w), centred=centred)


_RANGE_BLOCK_BYTES = 1 << 20  # rows per block: ~1 MiB, read once for both reductions
_RANGE_WIDTH = 1024  # values per row of the wide view the reductions run along
_RANGE_TASK_BLOCKS = 16  # blocks per worker task


def _span_range(X, first, last, r, block):
    """Column minima and maxima of rows [first, last) (see ``column_range``)."""
    d = X.shape[1]
    colmax = np.full(d, -np.inf)
    colmin = np.full(d, np.inf)
    for start in range(first, last, block):
        Xb = X[start : min(start + block, last)]
        m = len(Xb) // r * r
        parts = [Xb[:m].reshape(-1, r * d)] if m else []
        if m < len(Xb):
            parts.append(Xb[m:])
        for part in parts:
            width = part.shape[1]
            np.maximum(colmax, part.max(axis=0).reshape(width // d, d).max(axis=0), out=colmax)
            np.minimum(colmin, part.min(axis=0).reshape(width // d, d).min(axis=0), out=colmin)
    return colmin, colmax


def _fold_range(acc, part):
    return np.minimum(acc[0], part[0]), np.maximum(acc[1], part[1])


def _flat_span_range(flat, first, last, block):
    lo, hi = np.inf, -np.inf
    for start in range(first, last, block):
        part = flat[start : min(start + block, last)]
        # np.minimum, not min(): Python's min would drop a NaN.
        lo, hi = np.minimum(lo, part.min()), np.maximum(hi, part.max())
    return lo, hi


def overall_range(X):
    """Minimum and maximum of all of a C-contiguous X (NaN propagates), in
    ~1 MiB blocks: the minimum rereads each block from cache. One thread:
    the scan is bound by memory bandwidth (worker threads measured no
    faster)."""
    flat = X.reshape(-1)
    return _flat_span_range(flat, 0, flat.size, _RANGE_BLOCK_BYTES // 8)


def column_range(X):
    """Column minima and maxima of a C-contiguous 2-D array; NaN propagates.

    numpy reduces a C-ordered (n, d) array along axis 0 one short row at a
    time, which is slow for narrow rows. Viewing r consecutive rows as
    one row of r d values (no copy) makes the inner loop long and
    vectorised, and reducing the r partial rows at the end gives the same
    values exactly (max and min are order-free). Blocks of about 1 MiB let
    the minimum reread each block from cache; spans of blocks run on the
    worker threads of ``threads`` (numpy releases the GIL in reductions).
    """
    n, d = X.shape
    r = max(1, _RANGE_WIDTH // max(d, 1))
    block = max(r, (_RANGE_BLOCK_BYTES // (8 * max(d, 1))) // r * r)
    span = block * _RANGE_TASK_BLOCKS
    tasks = [(X, a, b, r, block) for a, b in row_spans(n, block, span)]
    # Reductions only: no BLAS call, so BLAS's thread count is left alone.
    return map_tasks(_span_range, tasks, fold=_fold_range, work=2.0 * X.size, blas=False)
