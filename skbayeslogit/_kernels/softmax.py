"""Compiled loops of the multiclass (softmax) passes.

Two kernels, each one float64 signature compiled on first use (never at
import) and cached on disk when a cache directory is writable (see
``config.jit``); only multiclass fits compile them.

``softmax_rows``
    The softmax likelihood of a block of rows in one read of ``eta``: the
    weighted loss sum, ``g = w (p - onehot(y))`` and, when asked, the packed
    upper triangle of each row's Hessian factor ``w (diag p - p p^T)``, in
    one read instead of numpy's ten passes over (n, K) temporaries, two
    fancy-index gathers for the class pairs and a second ``exp`` for p
    (figures in benchmarks/README.md).

``pack_outer``
    The packed outer products ``x_a x_b`` (a <= b) of a sub-block of rows,
    one row of the output per pair, for the GEMM of the multiclass Hessian
    pass (``_linear.design``). The same loop in numpy is one broadcast
    product per column a, d + 1 calls per sub-block, which held the GIL
    between them and cost a large share of the GEMM itself.

``moderated_softmax_rows``
    The moderated (probit-approximation) log predictive of a piece of rows
    from their latent means and packed covariances (the formula is in
    ``PosteriorPredictiveMixin._moderated_multiclass``): a compiled loop
    for the K(K-1)/2 pairwise exponents (one square root each)
    spread with their signs and row shifts over K x K,
    numpy's SIMD exp, and a compiled loop for the sums and the
    renormalisation. It beats both the numpy version (five (n, K, K)
    temporaries and reductions along their short last axis) and one
    compiled loop calling exp and sqrt itself (figures in
    benchmarks/README.md).

All run in the design's worker threads (``nogil``) on the rows of one task.
"""

import functools

import numpy as np

from .config import jit, numpy_first


@jit()
def _softmax_rows(y, eta, w, g, h, want_h):  # pragma: no cover - runs compiled
    n, K = eta.shape
    p = np.empty(K)
    total = 0.0
    for i in range(n):
        top = eta[i, 0]
        for k in range(1, K):
            top = max(top, eta[i, k])
        # The largest term is exp(0) = 1: s >= 1, so log(s) and 1 / s are safe.
        s = 0.0
        for k in range(K):
            e = np.exp(eta[i, k] - top)
            p[k] = e
            s += e
        wi = w[i]
        yi = y[i]
        total += wi * (np.log(s) - (eta[i, yi] - top))
        inv = 1.0 / s
        for k in range(K):
            p[k] *= inv
            g[i, k] = wi * p[k]
        g[i, yi] -= wi
        if want_h:
            j = 0
            for k in range(K):
                wpk = wi * p[k]
                h[i, j] = wpk * (1.0 - p[k])
                j += 1
                for m in range(k + 1, K):
                    h[i, j] = -(wpk * p[m])
                    j += 1
    return total


@jit()
def _pack_outer(x_t, m, out):  # pragma: no cover - runs compiled
    dx = x_t.shape[0]
    j = 0
    for a in range(dx):
        for b in range(a, dx):
            for i in range(m):
                out[j, i] = x_t[a, i] * x_t[b, i]
            j += 1


@jit()
def _moderated_shifted(mean, pairs, pk, pj, pkk, pjj, pkj, z, top):  # pragma: no cover
    # For the q-th class pair k = pk[q] < j = pj[q] (positions pkk, pjj, pkj
    # of c_kk, c_jj, c_kj in ``pairs``): z_kj = -(m_k - m_j) / sqrt(1 + pi/8
    # s_kj), s_kj = c_kk + c_jj - 2 c_kj; z_jk = -z_kj and z_kk = 0. Writes
    # z[i, k, j] = z_kj - top[i, k], top the row maximum (>= 0 as z_kk = 0),
    # so that sum_j exp(z[i, k, j]) lies in [1, K].
    n, K = top.shape
    n_pairs = pk.shape[0]
    scale = np.pi / 8.0
    diff = np.empty(n_pairs)
    spread = np.empty(n_pairs)
    for i in range(n):
        c = pairs[i]
        m = mean[i]
        # Gathers first, then the square roots and divisions over contiguous
        # buffers. (LLVM still emits scalar square roots here, the largest
        # part of the multiclass predictive.)
        for q in range(n_pairs):
            diff[q] = m[pj[q]] - m[pk[q]]
            spread[q] = c[pkk[q]] + c[pjj[q]] - 2.0 * c[pkj[q]]
        for q in range(n_pairs):
            v = spread[q] if spread[q] > 0.0 else 0.0
            diff[q] = diff[q] / np.sqrt(1.0 + scale * v)
        zi = z[i]
        ti = top[i]
        for k in range(K):
            ti[k] = 0.0
            zi[k, k] = 0.0
        for q in range(n_pairs):
            k = pk[q]
            j = pj[q]
            zkj = diff[q]
            zi[k, j] = zkj
            zi[j, k] = -zkj
            # max() compiles to vmaxsd, not a branch: the signs are random.
            ti[k] = max(ti[k], zkj)
            ti[j] = max(ti[j], -zkj)
        for k in range(K):
            t = ti[k]
            for j in range(K):
                zi[k, j] -= t


@jit()
def _moderated_finish(e, top, out):  # pragma: no cover - runs compiled
    # e = exp(z - top) from numpy; log p_k = -(log sum_j e[i, k, j] + top),
    # then renormalised: log p_k - logsumexp_l(log p_l).
    n, K = top.shape
    for i in range(n):
        best = -np.inf
        for k in range(K):
            total = 0.0
            for j in range(K):
                total += e[i, k, j]
            v = -(np.log(total) + top[i, k])
            out[i, k] = v
            if v > best:
                best = v
        total = 0.0
        for k in range(K):
            total += np.exp(out[i, k] - best)
        shift = np.log(total) + best
        for k in range(K):
            out[i, k] -= shift


@functools.cache
def _pair_positions(K):
    # The class pairs k < j and where c_kk, c_jj and c_kj sit in a row of
    # packed covariances; the same for every piece of a prediction.
    position = np.empty((K, K), dtype=np.int64)
    ku, lu = np.triu_indices(K)
    position[ku, lu] = np.arange(len(ku))
    k, j = np.triu_indices(K, 1)
    return k, j, position[k, k], position[j, j], position[k, j]


def moderated_softmax_rows(mean, pairs, out):
    """Moderated log predictive of each row, written into ``out``.

    Parameters
    ----------
    mean : ndarray of shape (m, K)
        Latent means.
    pairs : ndarray of shape (m, K(K+1)/2)
        Covariances Cov(eta_k, eta_l), k <= l, in ``np.triu_indices(K)``
        order.
    out : ndarray of shape (m, K), C order
        Normalised log probabilities.
    """
    m, K = mean.shape
    z = np.empty((m, K, K))
    top = np.empty((m, K))
    _moderated_shifted(
        np.ascontiguousarray(mean, dtype=np.float64),
        np.ascontiguousarray(pairs, dtype=np.float64),
        *_pair_positions(K),
        z,
        top,
    )
    # numpy's SIMD exp is several times cheaper than a compiled loop's call.
    np.exp(z, out=z)
    _moderated_finish(z, top, out)


def softmax_rows(y, eta, w, want_h):
    """Weighted loss sum, g (n, K) and, with ``want_h``, packed h (n, K(K+1)/2).

    Parameters
    ----------
    y : ndarray of shape (n,), int
        Class codes in 0..K-1.
    eta : ndarray of shape (n, K)
    w : ndarray of shape (n,)
        Non-negative row weights.
    want_h : bool
        Whether to form h; without it the returned h is None.

    Returns
    -------
    loss : float
    g : ndarray of shape (n, K)
    h : ndarray of shape (n, K(K+1)/2) or None
        Pairs k <= l in ``np.triu_indices(K)`` order.
    """
    y = np.ascontiguousarray(y, dtype=np.int64)
    eta = np.ascontiguousarray(eta, dtype=np.float64)
    w = np.ascontiguousarray(w, dtype=np.float64)
    n, K = eta.shape
    g = np.empty((n, K))
    # One signature whether or not h is wanted: an empty h stands in.
    h = np.empty((n, K * (K + 1) // 2) if want_h else (0, 0))
    if numpy_first(eta.size):
        loss = _softmax_rows_numpy(y, eta, w, g, h, bool(want_h))
    else:
        loss = _softmax_rows(y, eta, w, g, h, bool(want_h))
    return float(loss), g, (h if want_h else None)


def _softmax_rows_numpy(y, eta, w, g, h, want_h):
    # _softmax_rows in numpy, for calls too small to pay for its compile.
    n, K = eta.shape
    rows = np.arange(n)
    z = eta - eta.max(axis=1)[:, None]
    e = np.exp(z)
    s = e.sum(axis=1)
    total = float(np.dot(w, np.log(s) - z[rows, y]))
    p = e * (1.0 / s)[:, None]
    wp = w[:, None] * p
    g[:] = wp
    g[rows, y] -= w
    if want_h:
        first, second = np.triu_indices(K)
        h[:] = -(wp[:, first] * p[:, second])
        diagonal = first == second
        h[:, diagonal] = wp * (1.0 - p)
    return total


def pack_outer(x_t, m, out):
    """Fill ``out[j, :m]`` with ``x_t[a, :m] * x_t[b, :m]`` for the pairs a <= b.

    Parameters
    ----------
    x_t : ndarray of shape (dx, sub), float64, C order
        A sub-block of rows, transposed (rows down the columns).
    m : int
        Rows in use, m <= sub.
    out : ndarray of shape (dx (dx + 1) / 2, sub), float64, C order
        Written in place; pairs in ``np.triu_indices(dx)`` order.
    """
    dx = x_t.shape[0]
    if numpy_first(m):
        first, second = np.triu_indices(dx)
        np.multiply(x_t[first, :m], x_t[second, :m], out=out[:, :m])
        return
    _pack_outer(x_t, np.int64(m), out)
