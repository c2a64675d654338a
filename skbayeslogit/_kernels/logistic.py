"""The pointwise Bernoulli-logit loss and its derivatives, in one fused pass.

For each row, with e = exp(-|eta|) (the only exponential) and r = 1 / (1 + e):

    -log p(y | eta) = (max(eta, 0) - y eta) + log1p(e)
    g = w (p - y),   p = sigmoid(eta) = r if eta >= 0 else e r
    h = w p (1 - p) = w e r^2

All three are exact to rounding for every finite eta: nothing overflows, and
for y in {0, 1} the bracket is 0 or |eta| exactly, so the loss of a confidently
right row is log1p(e) without cancellation.

Split of the work: numpy's ``exp`` and ``log1p`` fill e and log1p(e) into
the output arrays; one compiled loop then does the rest (the loss sum and g,
h, overwriting those arrays) in a single read. numpy's SIMD versions are
far cheaper than numba's scalar calls (benchmarks/README.md has the
figures). The loss is summed in chunks of 1024 rows, so the
rounding error of the sum stays near (1024 + n / 1024) ulp.

The gradient-only pass on the design's worker threads (``gradient_span``)
is one compiled loop over a span of rows in 128 KiB chunks instead: it
calls exp and log1p row by row but holds no GIL between chunks, where the
numpy blocks lost (see ``gradient_span``).

Compilation: one signature per kernel, compiled on first use (not at
import) and cached on disk when a cache directory is writable; without one,
numba raises at decoration time and the kernel is compiled in memory
instead. X is typed read-only, which read-only inputs need and writable
ones also match, so neither makes a second compile.
"""

import numpy as np

from .config import lazy_kernel, numpy_first

_VEC = "float64[::1]"
_SIGNATURE = f"float64({_VEC}, {_VEC}, {_VEC}, {_VEC}, {_VEC}, boolean)"


def _pointwise(y, eta, w, g, h, derivs):  # pragma: no cover - runs compiled
    # On entry g holds e = exp(-|eta|) and h holds log1p(e); with ``derivs``
    # they are overwritten by the derivatives.
    n = eta.shape[0]
    total = 0.0
    start = 0
    while start < n:
        stop = min(start + 1024, n)
        part = 0.0
        for i in range(start, stop):
            t = eta[i]
            pos = t if t > 0.0 else 0.0
            part += w[i] * ((pos - y[i] * t) + h[i])
            if derivs:
                e = g[i]
                r = 1.0 / (1.0 + e)
                p = r if t >= 0.0 else e * r
                g[i] = w[i] * (p - y[i])
                h[i] = w[i] * (e * r * r)
        total += part
        start = stop
    return total


def _gradient_span(X, coef, b0, y, w, eta, grad, chunk):  # pragma: no cover - runs compiled
    # grad (d + 1,) accumulates X^T g and, in its last entry, sum(g).
    n, d = X.shape
    g = np.empty(chunk)
    total = 0.0
    g_sum = 0.0
    for start in range(0, n, chunk):
        stop = min(start + chunk, n)
        m = stop - start
        X_chunk = X[start:stop]
        linear = np.dot(X_chunk, coef)
        part = 0.0
        for i in range(m):
            r_i = start + i
            t = linear[i] + b0
            eta[r_i] = t
            e = np.exp(-abs(t))
            pos = t if t > 0.0 else 0.0
            part += w[r_i] * ((pos - y[r_i] * t) + np.log1p(e))
            r = 1.0 / (1.0 + e)
            p = r if t >= 0.0 else e * r
            g_i = w[r_i] * (p - y[r_i])
            g[i] = g_i
            g_sum += g_i
        total += part
        grad[:d] += np.dot(X_chunk.T, g[:m])
    grad[d] += g_sum
    return total


def _span_signature():
    from numba import types

    matrix = types.Array(types.float64, 2, "C", readonly=True)
    vector = types.Array(types.float64, 1, "C", readonly=True)
    out = types.float64[::1]
    return types.float64(matrix, vector, types.float64, vector, vector, out, out, types.int64)


_pointwise_kernel = lazy_kernel(_pointwise, lambda: _SIGNATURE)


def _pointwise_numpy(y, eta, w, g, h, derivs):
    # _pointwise in numpy, for calls too small to pay for its compile.
    total = float(np.dot(w, (np.maximum(eta, 0.0) - y * eta) + h))
    if derivs:
        e = g
        r = 1.0 / (1.0 + e)
        p = np.where(eta >= 0.0, r, e * r)
        h[:] = w * (e * r * r)
        g[:] = w * (p - y)
    return total


def _pointwise_call(y, eta, w, g, h, derivs):
    kernel = _pointwise_numpy if numpy_first(len(eta)) else _pointwise_kernel
    return kernel(y, eta, w, g, h, derivs)


_span_kernel = lazy_kernel(_gradient_span, _span_signature)


def _as_vector(a):
    return np.ascontiguousarray(a, dtype=np.float64)


def _fill_exp_log1p(eta, e, l1p):
    """e = exp(-|eta|) and l1p = log1p(e), into the given arrays."""
    np.abs(eta, out=e)
    np.negative(e, out=e)
    np.exp(e, out=e)
    np.log1p(e, out=l1p)


_LOSS_CHUNK = 16384  # rows per loss-only chunk: scratch stays in cache


def logistic_loss(y, eta, w):
    """Weighted sum of -log p(y | eta) under the logit link; a float."""
    y, eta, w = _as_vector(y), _as_vector(eta), _as_vector(w)
    n = len(eta)
    e = np.empty(min(n, _LOSS_CHUNK))
    l1p = np.empty_like(e)
    total = 0.0
    for start in range(0, n, _LOSS_CHUNK):
        stop = min(start + _LOSS_CHUNK, n)
        m = stop - start
        _fill_exp_log1p(eta[start:stop], e[:m], l1p[:m])
        total += _pointwise_call(
            y[start:stop], eta[start:stop], w[start:stop], e[:m], l1p[:m], False
        )
    return float(total)


def logistic_derivatives(y, eta, w):
    """Weighted loss sum, g = w (p - y) and h = w p (1 - p), shapes (n,).

    Meant for row blocks (the design's pass); the two outputs double as the
    scratch arrays.
    """
    y, eta, w = _as_vector(y), _as_vector(eta), _as_vector(w)
    g = np.empty_like(eta)
    h = np.empty_like(eta)
    _fill_exp_log1p(eta, g, h)
    loss = _pointwise_call(y, eta, w, g, h, True)
    return float(loss), g, h


_SPAN_CHUNK_BYTES = 1 << 17  # X per chunk of the span pass: stays in L2


def gradient_span(X, coef, b0, y, w, eta):
    """Loss sum, X^T g and sum(g) of a span of rows, with eta filled in.

    The design calls it for passes on its worker threads: one compiled loop
    does the whole span in 128 KiB chunks (exp and log1p row by row),
    holding no GIL between chunks. In the calling thread the design's
    per-block numpy path is used instead; its SIMD exp and log1p make it the
    faster one there, and this loop the faster one on two workers (figures
    in benchmarks/README.md).

    Parameters
    ----------
    X : ndarray of shape (m, d), float64, C-contiguous
        The span's rows (read only).
    coef : ndarray of shape (d,)
    b0 : float
        Intercept.
    y, w : ndarray of shape (m,)
        Labels in {0, 1} and weights.
    eta : ndarray of shape (m,), C-contiguous
        Written: the linear predictor of the span.

    Returns
    -------
    loss : float
    grad_x : ndarray of shape (d,)
    grad_b : float
    """
    d = X.shape[1]
    grad = np.zeros(d + 1)
    chunk = max(64, _SPAN_CHUNK_BYTES // (8 * max(d, 1)))
    loss = _span_kernel(
        X, _as_vector(coef), float(b0), _as_vector(y), _as_vector(w), eta, grad, chunk
    )
    return float(loss), grad[:d], float(grad[d])
