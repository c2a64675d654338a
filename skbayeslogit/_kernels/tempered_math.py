"""Tempered logarithm and exponential: the scalar maths the kernels share.

Method: E. Amid, M. K. Warmuth, R. Anil and T. Koren, "Robust Bi-Tempered
Logistic Loss Based on Bregman Divergences", NeurIPS 2019 (called "the paper"
in these modules).

Definitions (the paper, section 2)::

    log_t(u) = (u**(1 - t) - 1) / (1 - t)               u >= 0
    exp_t(u) = [1 + (1 - t) u]_+ ** (1 / (1 - t))
    p_i      = exp_t(a_i - lambda(a)),  lambda(a) such that sum_i p_i = 1
    L(a, y)  = sum_i [ y_i (log_t1 y_i - log_t1 p_i)
                       - (y_i**(2 - t1) - p_i**(2 - t1)) / (2 - t1) ],
               p = tempered_softmax(a, t2)

with ``log_1 = log``, ``exp_1 = exp``.  The loss is the Bregman divergence of
the convex function ``F(y) = sum_i y_i log_t1 y_i - y_i**(2 - t1) / (2 - t1)``
(``grad F = log_t1``), hence non-negative, and for ``t1 = t2 = 1`` it is the
cross-entropy.

When ``1 / (1 - t)`` is an integer n (|n| <= 16: t = 0.5, 0.8, 1.2, 1.25,
1.5, 2, ...) ``exp_t`` is a polynomial or reciprocal polynomial, evaluated by
repeated multiplication (:func:`ipow`, :func:`ipow_select`) instead of
``log1p`` and ``exp``.

Where the rest lives: the row solver of the normaliser in
:mod:`.tempered_rows`, the 16-row block solver in :mod:`.tempered_blocks`,
the loss in :mod:`.tempered_loss` and :mod:`.tempered_loss_blocks`, the choice
of kernel in :mod:`.tempered_dispatch`.  Everything here is compiled into
the kernels that call it (numba ``njit``, not cached on its own): numba's
disk cache is keyed on the file of each cached kernel, so after editing
a helper module clear the cache (``__pycache__`` or ``NUMBA_CACHE_DIR``).
Kernels never validate their input; :mod:`skbayeslogit.tempered_functions`
does.
"""

from __future__ import annotations

import math

import numba

from . import tempered_params
from .tempered_params import EPS, HUGE  # noqa: F401  (EPS: the kernel modules import it from here)


@numba.njit(nogil=True)
def upper_bracket(k, t):
    # -log_t(1/K): the normaliser when all shifted activations are 0, the
    # largest it can be.
    if k <= 1:
        return 0.0
    tm1 = t - 1.0
    hi = math.expm1(tm1 * math.log(k)) / tm1
    if hi > HUGE:
        hi = HUGE
    return hi


# Compiled into the kernels; the numpy path calls the Python function.
integer_power = numba.njit(nogil=True)(tempered_params.integer_power)


@numba.njit(nogil=True)
def ipow(x, n):
    # x**n for 0 <= n <= 31 by binary powering with a fixed number of steps,
    # so the row loops calling it have no data-dependent branches.
    result = x if n & 1 else 1.0
    x *= x
    if n & 2:
        result *= x
    x *= x
    if n & 4:
        result *= x
    x *= x
    if n & 8:
        result *= x
    x *= x
    if n & 16:
        result *= x
    return result


@numba.njit(nogil=True)
def texp(z, omt, n):
    # (1 + z)**(1 / omt) for z > -1, omt = 1 - t != 0: exp_t(z / omt).
    if n > 0:
        return ipow(1.0 + z, n)
    if n < 0:
        return ipow(1.0 / (1.0 + z), -n)
    return math.exp(math.log1p(z) / omt)


@numba.njit(nogil=True)
def texp_slope(z, omt, n):
    # (p, p**t) with p = (1 + z)**(1 / omt), using p**t = p / (1 + z); the
    # integer branches avoid all but one division.
    if n > 0:
        x = 1.0 + z
        q = ipow(x, n - 1)
        return q * x, q
    if n < 0:
        y = 1.0 / (1.0 + z)
        p = ipow(y, -n)
        return p, p * y
    p = math.exp(math.log1p(z) / omt)
    return p, p / (1.0 + z)


@numba.njit(nogil=True)
def row_max(row):
    m = row[0]
    for i in range(1, row.shape[0]):
        if row[i] > m:
            m = row[i]
    return m


@numba.njit(nogil=True)
def ipow_select(x, n):
    # ipow with selects instead of branches (multiplying by 1.0 is exact, so
    # the result is bitwise the same), which keeps a vectorised loop
    # straight-line.
    result = x if n & 1 else 1.0
    x = x * x
    result = result * (x if n & 2 else 1.0)
    x = x * x
    result = result * (x if n & 4 else 1.0)
    x = x * x
    result = result * (x if n & 8 else 1.0)
    x = x * x
    result = result * (x if n & 16 else 1.0)
    return result


@numba.njit(nogil=True)
def chunk_bounds(start, stop, j, n_chunks):
    # Bounds of chunk j of n_chunks over [start, stop).
    n = stop - start
    return start + j * n // n_chunks, start + (j + 1) * n // n_chunks
