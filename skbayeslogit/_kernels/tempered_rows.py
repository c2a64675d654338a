"""The tempered-softmax normaliser of one row at a time, for any temperature.

The "general" kernel family (see :mod:`.tempered_dispatch`); definitions in
:mod:`.tempered_math` (Amid, Warmuth, Anil & Koren, NeurIPS 2019, "the
paper").

How the normaliser is found (per row, after shifting the row by its maximum,
so that the shifted activations ``d_i <= 0`` and the shifted normaliser
``lambda_hat >= 0``; ``f(lambda) = sum_i exp_t(d_i - lambda) - 1``):

* ``t == 1``: ``lambda_hat = log sum_i exp(d_i)``, the ordinary softmax.
* ``f`` is decreasing and convex for every ``t >= 0`` and ``f(0) >= 0`` (the
  largest term is ``exp_t(0) = 1``); ``f(-log_t(1/K)) <= 0`` because every term
  is at most ``exp_t(-lambda)``.  So ``[0, -log_t(1/K)]`` brackets the root and
  Newton's method started to the left of the root moves monotonically towards
  it.  Newton is safeguarded by that bracket (a step leaving it is replaced by
  bisection) and stops when ``|f| <= 4 eps (sqrt(K) + 1)``, the rounding level
  of the sum itself.
* ``t > 1``: first the paper's fixed-point iteration (its Algorithm 1) in the
  variable ``s = 1 + (t - 1) lambda_hat``, ``s <- (sum_i exp_t(d_i / s))**(t - 1)``,
  which increases monotonically to the root from ``s = 1``; it runs until its
  steps stop shrinking by at least a half (then Newton is faster: 5 fixed-point
  steps leave ``sum p - 1 ~ 1e-2`` at ``K = 30000, t = 1.2``) or it has
  converged, and Newton finishes from there.
* ``t < 1``: Newton from ``lambda_hat = 0`` on the bracket above; classes with
  ``1 + (1 - t)(d_i - lambda) <= 0`` are outside the support and get ``p_i = 0``.
  At ``t = 0`` this is sparsemax (Martins & Astudillo, ICML 2016).
* ``K == 2``: a scalar Newton iteration, no row loops (the binary model).

A fit passes each row's normaliser from one objective evaluation to the next
(:func:`solve_row_from`): Newton on the convex ``log_t(sum p)`` lands at or
left of the root from any start, and from a nearby one it needs about half
the passes.

Compilation and threading: see :mod:`skbayeslogit._kernels.config` (lazy,
cached when a cache directory is writable, parallel rows only for large
inputs and only when no other Python thread is inside one of our parallel
kernels).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from .config import jit
from .tempered_math import (
    EPS,
    chunk_bounds,
    integer_power,
    row_max,
    texp,
    texp_slope,
    upper_bracket,
)
from .tempered_params import FIXED_POINT_MAXITER, FIXED_POINT_SPARE, NEWTON_MAXITER


@numba.njit(nogil=True)
def _add_term(z, omt, n, f, fp):
    # One class's p and p**t added to the sums f and fp, where it is inside
    # the support (z > -1).
    if z > -1.0:
        p, pt = texp_slope(z, omt, n)
        f += p
        fp += pt
    return f, fp


@numba.njit(nogil=True)
def _f_and_slope(row, m, lam, t, n):
    # f = sum_i exp_t(d_i - lam) - 1 and -df/dlam = sum_i p_i**t.
    omt = 1.0 - t
    f = -1.0
    fp = 0.0
    for i in range(row.shape[0]):
        f, fp = _add_term(omt * ((row[i] - m) - lam), omt, n, f, fp)
    return f, fp


@numba.njit(nogil=True)
def _f_and_slope2(d, lam, t, n):
    # The same for the two shifted activations (0, d), without a loop.
    omt = 1.0 - t
    f, fp = _add_term(-omt * lam, omt, n, -1.0, 0.0)
    return _add_term(omt * (d - lam), omt, n, f, fp)


@numba.njit(nogil=True)
def _bracketed(lam, f, new, lo, hi):
    # The bracket [lo, hi] shrunk at lam (the root is right of lam when
    # f > 0), and the step `new`, replaced by bisection when it leaves it.
    if f > 0.0:
        lo = lam
    else:
        hi = lam
    if not (new > lo and new < hi):
        new = lo + 0.5 * (hi - lo)
    return new, lo, hi


@numba.njit(nogil=True)
def newton_step(lam, f, fp, t, lo, hi):
    # Newton on g(lam) = log_t(F(lam)), F = f + 1 = sum_i p_i, rather than on
    # f itself: g is exactly linear when one term dominates or all terms are
    # equal, and keeps f's shape where it matters (concave increasing for
    # t > 1, convex decreasing for t < 1, as F**(1 - t) is a power mean of
    # affine functions of lam), so iterates from the left still approach the
    # root monotonically, in fewer steps.  A step leaving the bracket (from
    # rounding, or zero slope outside the support for t < 1) is replaced by
    # bisection.
    new = -np.inf
    if fp > 0.0 and f > -1.0:
        big_f = f + 1.0
        e = math.expm1((1.0 - t) * math.log(big_f))
        new = lam + big_f * e / ((1.0 - t) * (1.0 + e) * fp)
    return _bracketed(lam, f, new, lo, hi)


@numba.njit(nogil=True)
def newton_step_plain(lam, f, fp, lo, hi):
    # Newton on f itself: for two classes the extra log and expm1 of
    # newton_step cost more than the step they save.
    new = lam + f / fp if fp > 0.0 else -np.inf
    return _bracketed(lam, f, new, lo, hi)


@numba.njit(nogil=True)
def _newton(row, m, t, n, lam, hi):
    lo = 0.0
    tol = 4.0 * EPS * (math.sqrt(row.shape[0]) + 1.0)
    for _ in range(NEWTON_MAXITER):
        f, fp = _f_and_slope(row, m, lam, t, n)
        if abs(f) <= tol:
            return lam
        new, lo, hi = newton_step(lam, f, fp, t, lo, hi)
        if abs(new - lam) <= 2.0 * EPS * abs(lam) or hi - lo <= 4.0 * EPS * hi:
            return new
        lam = new
    return lam


@numba.njit(nogil=True)
def solve2(d, t, n):
    # Shifted normaliser of the two activations (d, 0), d <= 0, t != 1.
    lo = 0.0
    hi = upper_bracket(2, t)
    lam = 0.0
    tol = 4.0 * EPS * (math.sqrt(2.0) + 1.0)
    for _ in range(NEWTON_MAXITER):
        f, fp = _f_and_slope2(d, lam, t, n)
        if abs(f) <= tol:
            return lam
        new, lo, hi = newton_step_plain(lam, f, fp, lo, hi)
        if abs(new - lam) <= 2.0 * EPS * abs(lam) or hi - lo <= 4.0 * EPS * hi:
            return new
        lam = new
    return lam


@numba.njit(nogil=True)
def _fixed_point(row, m, t, n):
    # The paper's fixed point in s = 1 + (t - 1) lam, t > 1.  Returns a lam at
    # or (up to rounding) left of the root, where Newton is monotone.  It is
    # linearly convergent; once its observed rate predicts more than
    # FIXED_POINT_SPARE further steps, Newton (quadratic) takes over.
    tm1 = t - 1.0
    omt = -tm1
    lam = 0.0
    s = 1.0
    prev_step = np.inf
    for _ in range(FIXED_POINT_MAXITER):
        z_sum = 0.0
        for i in range(row.shape[0]):
            z_sum += texp(omt * (row[i] - m) / s, omt, n)
        new = math.expm1(tm1 * math.log(z_sum)) / tm1
        step = new - lam
        lam = new
        s = 1.0 + tm1 * lam
        target = 4.0 * EPS * lam
        if step <= target:
            break
        rate = step / prev_step
        if rate >= 1.0 or (
            rate > 0.0 and math.log(target / step) / math.log(rate) > FIXED_POINT_SPARE
        ):
            break
        prev_step = step
    return lam


@numba.njit(nogil=True)
def solve_row(row, t, n):
    """Return (row max, shifted normaliser) of one row of activations."""
    k = row.shape[0]
    m = row_max(row)
    if t == 1.0:
        s = 0.0
        for i in range(k):
            s += math.exp(row[i] - m)
        return m, math.log(s)
    if k == 1:
        return m, 0.0
    if k == 2:
        return m, solve2(min(row[0], row[1]) - m, t, n)
    lam0 = _fixed_point(row, m, t, n) if t > 1.0 else 0.0
    return m, _newton(row, m, t, n, lam0, upper_bracket(k, t))


@numba.njit(nogil=True)
def solve_row_from(row, t, n, start):
    """As :func:`solve_row`, with Newton started from a previous normaliser.

    `start` is an absolute normaliser (of nearby activations, e.g. the
    previous objective evaluation of a fit).  Newton on the convex
    ``log_t(sum p)`` lands at or left of the root from any start, so a start
    on either side is safe; the fixed point of a cold start is skipped.
    """
    k = row.shape[0]
    if t == 1.0 or k <= 2:
        return solve_row(row, t, n)
    m = row_max(row)
    hi = upper_bracket(k, t)
    return m, _newton(row, m, t, n, min(max(start - m, 0.0), hi), hi)


@numba.njit(nogil=True)
def fill_probabilities(row, m, lam, t, n, out):
    if t == 1.0:
        for i in range(row.shape[0]):
            out[i] = math.exp((row[i] - m) - lam)
        return
    omt = 1.0 - t
    for i in range(row.shape[0]):
        z = omt * ((row[i] - m) - lam)
        out[i] = texp(z, omt, n) if z > -1.0 else 0.0


@numba.njit(nogil=True)
def _normalise_one(a, t, n, p, lam, want_p, r):
    m, lh = solve_row(a[r], t, n)
    lam[r] = m + lh
    if want_p:
        fill_probabilities(a[r], m, lh, t, n, p[r])


# Each kernel family's serial kernel is its row-range function itself, and
# the parallel kernel calls it on chunks: a wrapper layer would be one more
# module for LLVM to optimise with everything inlined (a long compile).
# Both take (..., start, stop, n_chunks) so that launch() can hand them the
# same arguments; the parallel one splits [start, stop) into n_chunks
# chunks, the serial one ignores n_chunks (the parallel one passes its own
# n_chunks on, not a literal 1, which numba would type as a second signature).


@jit()
def normalise_general_serial(a, t, p, lam, want_p, start, stop, n_chunks):
    n = integer_power(t)
    for i in range(start, stop):
        _normalise_one(a, t, n, p, lam, want_p, i)


@jit(parallel=True)
def normalise_general_parallel(a, t, p, lam, want_p, start, stop, n_chunks):
    for j in numba.prange(n_chunks):
        lo, hi = chunk_bounds(start, stop, j, n_chunks)
        normalise_general_serial(a, t, p, lam, want_p, lo, hi, n_chunks)
