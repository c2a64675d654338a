"""numba kernels: the logistic log-likelihood of many parameter vectors, block by block.

The logistic log-likelihood of many parameter draws at once needs, for
every draw s, sum_i w_i softplus(eta_is) over the rows of a block of the
linear predictors (rows x draws). With softplus(t) = max(t, 0) +
log(1 + exp(-|t|)) and max(t, 0) = (t + |t|) / 2, the part linear in t is
a matrix product done once per check, and what is left per entry is |t|
and log(1 + exp(-|t|)).

The logarithm is the costly call, so rows of unit weight are multiplied
into a running product of their factors 1 + exp(-|t|) (each in (1, 2]),
whose logarithm is taken once every ``_FLUSH`` rows, before it could
overflow (2^512 < 1.8e308); only rows of other weights pay a log1p each.
The exponential exp(-|t|) is computed row by row by ``_exp_neg_abs``, a
loop without calls that the compiler turns into SIMD instructions: Cody-Waite
reduction t = k ln 2 + r, |r| <= ln 2 / 2, a degree-12 Taylor polynomial for
exp(r) (truncation error r^13 / 13! < 1e-16 relative) and 2^k written
straight into the exponent bits. It replaces libm's scalar exp, which numba
calls otherwise and which cost more per value (benchmarks/README.md).
Arguments below -700 are clamped there (exp(-700) = 1e-304; 1 + e is 1
either way).

Rounding: the product's relative error grows by one ulp a factor, so each
flushed logarithm is off by at most about 512 ulp (1e-13), against a sum
of order n; a factor 1 + e rounds e to the ulp of 1, 1e-16 a row.
"""

import math

import numpy as np

from .config import jit, lazy_kernel

_FLUSH = 512
_LOG2E = 1.4426950408889634
# ln 2 split in a high part with trailing zero bits and the rest (Cody & Waite).
_LN2_HI = 0.6931471803691238
_LN2_LO = 1.9082149292705877e-10
_C2, _C3, _C4, _C5, _C6, _C7, _C8, _C9, _C10, _C11, _C12 = (
    1.0 / math.factorial(i) for i in range(2, 13)
)


@jit()
def _exp_neg_abs(t, out, bits):  # pragma: no cover - runs compiled
    # out[j] = exp(-|t[j]|); bits is int64 scratch of the same length.
    for j in range(t.shape[0]):
        x = max(-abs(t[j]), -700.0)
        k = np.floor(x * _LOG2E + 0.5)
        r = (x - k * _LN2_HI) - k * _LN2_LO
        p = _C12 * r + _C11
        p = p * r + _C10
        p = p * r + _C9
        p = p * r + _C8
        p = p * r + _C7
        p = p * r + _C6
        p = p * r + _C5
        p = p * r + _C4
        p = p * r + _C3
        p = p * r + _C2
        p = p * r + 1.0
        out[j] = p * r + 1.0
        bits[j] = (np.int64(k) + 1023) << 52
    scale = bits.view(np.float64)
    for j in range(t.shape[0]):
        out[j] *= scale[j]


def _sums(E, w, abs_sum, log_sum):  # pragma: no cover - runs compiled
    m, S = E.shape
    prod = np.ones(S)
    e = np.empty(S)
    bits = np.empty(S, dtype=np.int64)
    pending = 0
    for i in range(m):
        wi = w[i]
        if wi == 0.0:
            continue
        row = E[i]
        _exp_neg_abs(row, e, bits)
        if wi == 1.0:
            for j in range(S):
                abs_sum[j] += abs(row[j])
                prod[j] *= 1.0 + e[j]
            pending += 1
            if pending == _FLUSH:
                for j in range(S):
                    log_sum[j] += np.log(prod[j])
                    prod[j] = 1.0
                pending = 0
        else:
            for j in range(S):
                abs_sum[j] += wi * abs(row[j])
                log_sum[j] += wi * np.log1p(e[j])
    if pending:
        for j in range(S):
            log_sum[j] += np.log(prod[j])


def _signature():
    from numba import types

    block = types.Array(types.float64, 2, "C", readonly=True)
    vector = types.Array(types.float64, 1, "C", readonly=True)
    out = types.float64[::1]
    return types.void(block, vector, out, out)


def _value_grad(E, y, w, value, G):  # pragma: no cover - runs compiled
    # E is (C, m): one row per parameter vector, so that every loop runs
    # along the m data rows. value[j] += sum_i w_i log p(y_i | E_ji);
    # G[j, i] = w_i (y_i - p_ji), the derivative of the log-likelihood in
    # eta; the log(1 + e) terms of unit-weight rows go through a running
    # product as in ``_sums``.
    C, m = E.shape
    e = np.empty(m)
    bits = np.empty(m, dtype=np.int64)
    for j in range(C):
        row = E[j]
        _exp_neg_abs(row, e, bits)
        total = 0.0
        prod = 1.0
        pending = 0
        for i in range(m):
            t = row[i]
            wi = w[i]
            r = 1.0 / (1.0 + e[i])
            p = r if t >= 0.0 else e[i] * r
            G[j, i] = wi * (y[i] - p)
            if wi == 1.0:
                total += (y[i] - 0.5) * t - 0.5 * abs(t)
                prod *= 1.0 + e[i]
                pending += 1
                if pending == _FLUSH:
                    total -= np.log(prod)
                    prod = 1.0
                    pending = 0
            elif wi != 0.0:
                total += wi * ((y[i] - 0.5) * t - 0.5 * abs(t) - np.log1p(e[i]))
        value[j] += total - np.log(prod)


def _value_grad_signature():
    from numba import types

    block = types.Array(types.float64, 2, "C", readonly=True)
    vector = types.Array(types.float64, 1, "C", readonly=True)
    return types.void(block, vector, vector, types.float64[::1], types.float64[:, ::1])


_kernel = lazy_kernel(_sums, _signature)
_value_grad_kernel = lazy_kernel(_value_grad, _value_grad_signature)


def softplus_sums(E, w, abs_sum, log_sum):
    """Add sum_i w_i |E_is| and sum_i w_i log(1 + exp(-|E_is|)) into the outputs.

    Parameters
    ----------
    E : ndarray of shape (m, S), float64, C order
        Linear predictors of m rows under S draws.
    w : ndarray of shape (m,), float64, C order
        Row weights (non-negative).
    abs_sum, log_sum : ndarray of shape (S,), float64
        Accumulated in place.
    """
    _kernel(E, w, abs_sum, log_sum)


def logistic_value_grad(E, y, w, value, G):
    """Per-vector log-likelihood sums and the derivative in eta, for a few vectors.

    Parameters
    ----------
    E : ndarray of shape (C, m), float64, C order
        Linear predictors of m rows under C parameter vectors (one row per
        vector).
    y, w : ndarray of shape (m,), float64
        Labels in {0, 1} and row weights.
    value : ndarray of shape (C,)
        sum_i w_i log p(y_i | E_ji) is added into it.
    G : ndarray of shape (C, m), C order
        Written: w_i (y_i - sigmoid(E_ji)).
    """
    _value_grad_kernel(E, y, w, value, G)
