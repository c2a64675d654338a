"""The bi-tempered loss and its gradient, row by row.

The loss of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss
Based on Bregman Divergences", NeurIPS 2019 (definitions in
:mod:`.tempered_math`), given each row's normaliser from
:mod:`.tempered_rows` or :mod:`.tempered_blocks`.

Gradient: ``d exp_t(x)/dx = exp_t(x)**t``; differentiating ``sum_i p_i = 1``
gives ``d lambda / d a_j = p_j**t2 / sum_k p_k**t2 =: q_j`` and
``d p_i / d a_j = p_i**t2 (delta_ij - q_j)``.  With
``dL/dp_i = p_i**(-t1) (p_i - y_i)`` the gradient of the loss is
``g_j = v_j - q_j sum_i v_i`` with ``v_i = p_i**(t2 - t1) (p_i - y_i)``; it
sums to zero over classes (shift invariance) and is ``p - y`` at
``t1 = t2 = 1``.  The kernels work with ``log p_i`` and with
``x_i = 1 + (1 - t2)(d_i - lambda_hat)`` (``p_i**(t2 - 1) = 1 / x_i``), so
probabilities that underflow do not turn into NaN or infinite losses.

Label smoothing: the standard form ``y <- (1 - ls) y + ls / K`` (Szegedy et
al., CVPR 2016), applied to one-hot and probability labels alike.

The kernels here are the "general" family (one row at a time, any
temperature) and the binary model's scalar rows; the integer-power family
is in :mod:`.tempered_loss_blocks`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from .config import jit
from .tempered_math import chunk_bounds, integer_power
from .tempered_rows import solve2, solve_row, solve_row_from


@numba.njit(nogil=True)
def _bregman_gap(delta, alpha, beta):
    # B(delta) = expm1(beta delta) / beta - expm1(alpha delta) / alpha
    # (alpha = 1 - t1, beta = 2 - t1; the alpha term is delta at alpha = 0),
    # so that a class's loss term is y**beta B(log p - log y).  B >= 0 and
    # B = delta**2 / 2 + O(delta**3): near 0 the two expm1 cancel, and the
    # Taylor series sum_k (beta**(k-1) - alpha**(k-1)) delta**k / k! is used
    # (|delta| < 0.1, 11 terms: truncation below 1e-16 relative).
    if abs(delta) < 0.1:
        total = 0.0
        a_pow = 1.0
        b_pow = 1.0
        d_pow = delta
        fact = 1.0
        for k in range(2, 13):
            a_pow *= alpha
            b_pow *= beta
            d_pow *= delta
            fact *= k
            total += (b_pow - a_pow) * d_pow / fact
        return total
    first = math.expm1(beta * delta) / beta
    if alpha == 0.0:
        return first - delta
    return first - math.expm1(alpha * delta) / alpha


@numba.njit(nogil=True)
def class_terms(dl, y, logy, t1, t2):
    """One class's loss term, v_i and p_i**t2 given dl = d_i - lambda_hat.

    The term is the scalar Bregman divergence
    ``y (log_t1 y - log_t1 p) - (y**(2-t1) - p**(2-t1)) / (2-t1)``, written
    as ``y**(2-t1) B(log p - log y)`` (no cancellation when p ~ y) or, when
    p > e y, directly (no overflow of expm1); ``p = 0`` only outside the
    support (t2 < 1), where ``log p = -inf`` gives the limit.
    """
    alpha = 1.0 - t1
    beta = 2.0 - t1
    if t2 == 1.0:
        inside = True
        ell = dl
        x = 1.0
    else:
        z = (1.0 - t2) * dl
        inside = z > -1.0
        x = 1.0 + z
        ell = math.log1p(z) / (1.0 - t2) if inside else -np.inf
    if inside:
        p = math.exp(ell)
        p_alpha = 1.0 if alpha == 0.0 else math.exp(alpha * ell)
        w = p / x
        v = p_alpha / x * (p - y)
    else:
        # Outside the support p_i = 0 and d p_i / d a = 0.
        p = 0.0
        p_alpha = 0.0
        w = 0.0
        v = 0.0
    if y <= 0.0:
        term = p * p_alpha / beta
    else:
        delta = ell - logy
        if delta > 1.0:
            # log_t1 p - log_t1 y as exp(alpha logy) expm1(alpha delta) / alpha:
            # the difference of the two powers, each ~ 1 for t1 near 1,
            # divided by a tiny alpha lost every digit (error 0.02 at
            # alpha = 1e-16).
            logt_gap = (
                delta
                if alpha == 0.0
                else math.exp(alpha * logy) * math.expm1(alpha * delta) / alpha
            )
            term = (p * p_alpha - math.exp(beta * logy)) / beta - y * logt_gap
        else:
            term = math.exp(beta * logy) * _bregman_gap(delta, alpha, beta)
    # Each term is >= 0 in exact arithmetic; a negative value is rounding.
    if term < 0.0:
        term = 0.0
    return term, v, w


@numba.njit(nogil=True)
def loss_row(row, m, lam, t1, t2, ls, c, yrow, use_index, g, w):
    # Loss and gradient of one row, given its maximum m and shifted
    # normaliser lam.
    k = row.shape[0]
    keep = 1.0 - ls
    base = ls / k
    log_off = math.log(base) if base > 0.0 else -np.inf
    log_on = math.log(keep + base)
    total = 0.0
    s2 = 0.0
    vsum = 0.0
    for i in range(k):
        if use_index:
            if i == c:
                y = keep + base
                logy = log_on
            else:
                y = base
                logy = log_off
        else:
            y = keep * yrow[i] + base
            logy = math.log(y) if y > 0.0 else -np.inf
        term, v, wi = class_terms((row[i] - m) - lam, y, logy, t1, t2)
        total += term
        s2 += wi
        vsum += v
        g[i] = v
        w[i] = wi
    ratio = vsum / s2
    for i in range(k):
        g[i] -= w[i] * ratio
    return total


@numba.njit(nogil=True)
def _binary_row(a, y1, t1, t2, ls):
    d = -abs(a)
    lam = math.log1p(math.exp(d)) if t2 == 1.0 else solve2(d, t2, integer_power(t2))
    if a >= 0.0:
        d0 = d
        d1 = 0.0
    else:
        d0 = 0.0
        d1 = d
    y1s = (1.0 - ls) * y1 + 0.5 * ls
    y0s = (1.0 - ls) * (1.0 - y1) + 0.5 * ls
    term0, v0, w0 = class_terms(d0 - lam, y0s, math.log(y0s) if y0s > 0.0 else -np.inf, t1, t2)
    term1, v1, w1 = class_terms(d1 - lam, y1s, math.log(y1s) if y1s > 0.0 else -np.inf, t1, t2)
    return term0 + term1, v1 - w1 * (v0 + v1) / (w0 + w1)


@jit()
def loss_general_serial(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # lam_io: absolute normalisers, read as starting points when warm and
    # overwritten with this evaluation's.
    n2 = integer_power(t2)
    w = np.empty(a.shape[1])
    for i in range(start, stop):
        if warm:
            m, lh = solve_row_from(a[i], t2, n2, lam_io[i])
        else:
            m, lh = solve_row(a[i], t2, n2)
        c = idx[i] if use_index else 0
        yrow = yprob[0] if use_index else yprob[i]
        loss[i] = loss_row(a[i], m, lh, t1, t2, ls, c, yrow, use_index, g[i], w)
        lam_io[i] = m + lh


@jit(parallel=True)
def loss_general_parallel(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # Chunks rather than rows so that the scratch arrays are allocated per
    # chunk.
    for j in numba.prange(n_chunks):
        lo, hi = chunk_bounds(start, stop, j, n_chunks)
        loss_general_serial(
            a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, lo, hi, n_chunks
        )


@jit()
def binary_serial(a, y, t1, t2, ls, loss, grad):
    for r in range(a.shape[0]):
        loss[r], grad[r] = _binary_row(a[r], y[r], t1, t2, ls)


@jit(parallel=True)
def binary_parallel(a, y, t1, t2, ls, loss, grad):
    for r in numba.prange(a.shape[0]):
        loss[r], grad[r] = _binary_row(a[r], y[r], t1, t2, ls)
