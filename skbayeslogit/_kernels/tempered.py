"""Tempered logarithm/exponential, tempered softmax and the bi-tempered loss.

Method: E. Amid, M. K. Warmuth, R. Anil and T. Koren, "Robust Bi-Tempered
Logistic Loss Based on Bregman Divergences", NeurIPS 2019 (called "the paper"
below).

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

Rows in blocks: when ``1 / (1 - t)`` is an integer n (|n| <= 16: t = 0.5,
0.8, 1.2, 1.25, 1.5, 2, ...) ``exp_t`` is a polynomial or reciprocal
polynomial, and the iterations above run on 16 rows at once with the loop
over rows innermost, so that LLVM vectorises it; each row keeps its own
iteration and stopping tests and its sums over classes in order, so a row's
result does not depend on its neighbours.  For the loss, when also
``(1 - t1) n`` is an integer, the terms of the classes with label 0 are
rational functions of ``1 + (1 - t2)(d_i - lambda_hat)`` and are
vectorised the same way; the labelled class uses the general formula.
Other temperatures solve row by row.  A fit passes each row's normaliser
from one objective evaluation to the next (:func:`bitempered_loss_warm`):
Newton on the convex ``log_t(sum p)`` lands at or left of the root from any
start, and from a nearby one it needs about half the passes.

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

Compilation and threading: see :mod:`skbayeslogit._kernels.config` (lazy,
cached when a cache directory is writable, parallel rows only for large
inputs and only when no other Python thread is inside one of our parallel
kernels).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from .config import jit, launch

__all__ = [
    "log_t",
    "exp_t",
    "tempered_softmax",
    "tempered_normaliser",
    "tempered_sigmoid",
    "bitempered_loss",
    "bitempered_loss_binary",
    "bitempered_loss_warm",
]

_EPS = float(np.finfo(np.float64).eps)
_HUGE = float(np.finfo(np.float64).max)
_T_MAX = 10.0
_NEWTON_MAXITER = 200
_FIXED_POINT_MAXITER = 50
_FIXED_POINT_SPARE = 3.0
# Rows per chunk of the binary loss on the two-class block solver (2 MiB
# of pairs).
_BINARY_CHUNK_ROWS = 1 << 17
# Probability rows are accepted when they sum to one within this (float32
# round-off of a normalised row is ~1e-7; anything larger is a different
# measure, not a rounding error).
_LABEL_SUM_ATOL = 1e-6


# ---------------------------------------------------------------------------
# scalar and row helpers (compiled into the kernels that call them)
# ---------------------------------------------------------------------------


@numba.njit(nogil=True)
def _upper_bracket(k, t):
    # -log_t(1/K): the normaliser when all shifted activations are 0, the
    # largest it can be.
    if k <= 1:
        return 0.0
    tm1 = t - 1.0
    hi = math.expm1(tm1 * math.log(k)) / tm1
    if hi > _HUGE:
        hi = _HUGE
    return hi


@numba.njit(nogil=True)
def _integer_power(t):
    # n when 1 / (1 - t) is the integer n (to rounding), 1 <= |n| <= 16: then
    # exp_t is a polynomial (t < 1) or reciprocal polynomial (t > 1) and
    # repeated multiplication replaces log1p + exp, with a relative error of
    # at most |n| eps / 2 (the rounding of 1 + z, amplified n times).  0: no.
    if t == 1.0:
        return 0
    r = 1.0 / (1.0 - t)
    n = round(r)
    if n != 0 and abs(n) <= 16 and abs(r - n) <= 8.0 * _EPS * abs(r):
        return int(n)
    return 0


@numba.njit(nogil=True)
def _ipow(x, n):
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
def _texp(z, omt, n):
    # (1 + z)**(1 / omt) for z > -1, omt = 1 - t != 0: exp_t(z / omt).
    if n > 0:
        return _ipow(1.0 + z, n)
    if n < 0:
        return _ipow(1.0 / (1.0 + z), -n)
    return math.exp(math.log1p(z) / omt)


@numba.njit(nogil=True)
def _texp_slope(z, omt, n):
    # (p, p**t) with p = (1 + z)**(1 / omt), using p**t = p / (1 + z); the
    # integer branches avoid all but one division.
    if n > 0:
        x = 1.0 + z
        q = _ipow(x, n - 1)
        return q * x, q
    if n < 0:
        y = 1.0 / (1.0 + z)
        p = _ipow(y, -n)
        return p, p * y
    p = math.exp(math.log1p(z) / omt)
    return p, p / (1.0 + z)


@numba.njit(nogil=True)
def _row_max(row):
    m = row[0]
    for i in range(1, row.shape[0]):
        if row[i] > m:
            m = row[i]
    return m


@numba.njit(nogil=True)
def _f_and_slope(row, m, lam, t, n):
    # f = sum_i exp_t(d_i - lam) - 1 and -df/dlam = sum_i p_i**t.
    omt = 1.0 - t
    f = -1.0
    fp = 0.0
    for i in range(row.shape[0]):
        z = omt * ((row[i] - m) - lam)
        if z > -1.0:
            p, pt = _texp_slope(z, omt, n)
            f += p
            fp += pt
    return f, fp


@numba.njit(nogil=True)
def _f_and_slope2(d, lam, t, n):
    omt = 1.0 - t
    f = -1.0
    fp = 0.0
    z = -omt * lam
    if z > -1.0:
        p, pt = _texp_slope(z, omt, n)
        f += p
        fp += pt
    z = omt * (d - lam)
    if z > -1.0:
        p, pt = _texp_slope(z, omt, n)
        f += p
        fp += pt
    return f, fp


@numba.njit(nogil=True)
def _newton_step(lam, f, fp, t, lo, hi):
    # Newton on g(lam) = log_t(F(lam)), F = f + 1 = sum_i p_i, rather than on
    # f itself: g is exactly linear when one term dominates or all terms are
    # equal, and keeps f's shape where it matters (concave increasing for
    # t > 1, convex decreasing for t < 1, as F**(1 - t) is a power mean of
    # affine functions of lam), so iterates from the left still approach the
    # root monotonically, in fewer steps.  A step leaving the bracket (from
    # rounding, or zero slope outside the support for t < 1) is replaced by
    # bisection.
    if f > 0.0:
        lo = lam
    else:
        hi = lam
    new = lo - 1.0
    if fp > 0.0 and f > -1.0:
        big_f = f + 1.0
        e = math.expm1((1.0 - t) * math.log(big_f))
        new = lam + big_f * e / ((1.0 - t) * (1.0 + e) * fp)
    if not (new > lo and new < hi):
        new = lo + 0.5 * (hi - lo)
    return new, lo, hi


@numba.njit(nogil=True)
def _newton_step_plain(lam, f, fp, lo, hi):
    # Newton on f itself: for two classes the extra log and expm1 of
    # _newton_step cost more than the step they save.
    if f > 0.0:
        lo = lam
    else:
        hi = lam
    new = lam + f / fp if fp > 0.0 else lo - 1.0
    if not (new > lo and new < hi):
        new = lo + 0.5 * (hi - lo)
    return new, lo, hi


@numba.njit(nogil=True)
def _newton(row, m, t, n, lam, hi):
    lo = 0.0
    tol = 4.0 * _EPS * (math.sqrt(row.shape[0]) + 1.0)
    for _ in range(_NEWTON_MAXITER):
        f, fp = _f_and_slope(row, m, lam, t, n)
        if abs(f) <= tol:
            return lam
        new, lo, hi = _newton_step(lam, f, fp, t, lo, hi)
        if abs(new - lam) <= 2.0 * _EPS * abs(lam) or hi - lo <= 4.0 * _EPS * hi:
            return new
        lam = new
    return lam


@numba.njit(nogil=True)
def _solve2(d, t, n):
    # Shifted normaliser of the two activations (d, 0), d <= 0, t != 1.
    lo = 0.0
    hi = _upper_bracket(2, t)
    lam = 0.0
    tol = 4.0 * _EPS * (math.sqrt(2.0) + 1.0)
    for _ in range(_NEWTON_MAXITER):
        f, fp = _f_and_slope2(d, lam, t, n)
        if abs(f) <= tol:
            return lam
        new, lo, hi = _newton_step_plain(lam, f, fp, lo, hi)
        if abs(new - lam) <= 2.0 * _EPS * abs(lam) or hi - lo <= 4.0 * _EPS * hi:
            return new
        lam = new
    return lam


@numba.njit(nogil=True)
def _fixed_point(row, m, t, n):
    # The paper's fixed point in s = 1 + (t - 1) lam, t > 1.  Returns a lam at
    # or (up to rounding) left of the root, where Newton is monotone.  It is
    # linearly convergent; once its observed rate predicts more than
    # _FIXED_POINT_SPARE further steps, Newton (quadratic) takes over.
    tm1 = t - 1.0
    omt = -tm1
    lam = 0.0
    s = 1.0
    prev_step = np.inf
    for _ in range(_FIXED_POINT_MAXITER):
        z_sum = 0.0
        for i in range(row.shape[0]):
            z_sum += _texp(omt * (row[i] - m) / s, omt, n)
        new = math.expm1(tm1 * math.log(z_sum)) / tm1
        step = new - lam
        lam = new
        s = 1.0 + tm1 * lam
        target = 4.0 * _EPS * lam
        if step <= target:
            break
        rate = step / prev_step
        if rate >= 1.0 or (
            rate > 0.0 and math.log(target / step) / math.log(rate) > _FIXED_POINT_SPARE
        ):
            break
        prev_step = step
    return lam


@numba.njit(nogil=True)
def _solve_row(row, t, n):
    """Return (row max, shifted normaliser) of one row of activations."""
    k = row.shape[0]
    m = _row_max(row)
    if t == 1.0:
        s = 0.0
        for i in range(k):
            s += math.exp(row[i] - m)
        return m, math.log(s)
    if k == 1:
        return m, 0.0
    if k == 2:
        return m, _solve2(min(row[0], row[1]) - m, t, n)
    lam0 = _fixed_point(row, m, t, n) if t > 1.0 else 0.0
    return m, _newton(row, m, t, n, lam0, _upper_bracket(k, t))


@numba.njit(nogil=True)
def _solve_row_from(row, t, n, start):
    """As :func:`_solve_row`, with Newton started from a previous normaliser.

    `start` is an absolute normaliser (of nearby activations, e.g. the
    previous objective evaluation of a fit).  Newton on the convex
    ``log_t(sum p)`` lands at or left of the root from any start, so a start
    on either side is safe; the fixed point of a cold start is skipped.
    """
    k = row.shape[0]
    if t == 1.0 or k <= 2:
        return _solve_row(row, t, n)
    m = _row_max(row)
    hi = _upper_bracket(k, t)
    return m, _newton(row, m, t, n, min(max(start - m, 0.0), hi), hi)


# Rows solved together by the block solver.  The loops over a block's rows
# are innermost, so LLVM vectorises them (4 doubles per AVX2 instruction)
# while each row's sums still run over its classes in order: every row gets
# bitwise the result of the one-row solver.  16 rows: measured fastest per
# element on AVX2/AVX-512 (8: 0.9 ns, 16: 0.8 ns, 32: 1.3 ns at K = 10).
_BLOCK = 16


@numba.njit(nogil=True)
def _ipow_select(x, n):
    # _ipow with selects instead of branches (multiplying by 1.0 is exact, so
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


# error_model="numpy": IEEE division.  numba's default model tests every
# float division for zero (to raise ZeroDivisionError), and that branch
# stops LLVM from vectorising the loop.  The finished lanes of a block keep
# being evaluated, and their values are discarded.
@numba.njit(nogil=True, error_model="numpy")
def _block_sums(dsh, lam, omt, n, f, fp):
    # f_b = sum_i exp_t(d_ib - lam_b) - 1 and fp_b = sum_i p_ib**t for the
    # block's rows b (integer-power case n != 0), as _f_and_slope does for
    # one row.  The lane count is read from the array: a compile-time
    # constant trip count gets the loop unrolled instead, and numba leaves
    # the straight-line (SLP) vectoriser off.
    lanes = dsh.shape[1]
    for b in range(lanes):
        f[b] = -1.0
        fp[b] = 0.0
    if n > 0:
        for i in range(dsh.shape[0]):
            for b in range(lanes):
                z = omt * (dsh[i, b] - lam[b])
                x = 1.0 + z
                q = _ipow_select(x, n - 1)
                inside = z > -1.0
                f[b] += q * x if inside else 0.0
                fp[b] += q if inside else 0.0
    else:
        # t > 1: z >= 0 for d <= 0 <= lam, every class is in the support.
        for i in range(dsh.shape[0]):
            for b in range(lanes):
                y = 1.0 / (1.0 + omt * (dsh[i, b] - lam[b]))
                p = _ipow_select(y, -n)
                f[b] += p
                fp[b] += p * y


@numba.njit(nogil=True, error_model="numpy")
def _block_fixed_point_sums(dsh, s, omt, n, total):
    # sum_i exp_t(d_ib / s_b) of _fixed_point, t > 1, integer power n < 0.
    lanes = dsh.shape[1]
    for b in range(lanes):
        total[b] = 0.0
    for i in range(dsh.shape[0]):
        for b in range(lanes):
            total[b] += _ipow_select(1.0 / (1.0 + omt * dsh[i, b] / s[b]), -n)


@numba.njit(nogil=True)
def _block_rows(rows, r, stop):
    # Rows r .. r + B - 1 of a chunk ending at stop; a short block repeats its
    # last row, so that every row of an integer-power case takes the same
    # code (and gets the same bits) whatever its position.
    for b in range(_BLOCK):
        rows[b] = min(r + b, stop - 1)


@numba.njit(nogil=True)
def _block_scratch(k):
    """Work arrays of :func:`_solve_block`: (shifted rows (K, B), 7 lane arrays)."""
    return (
        np.empty((k, _BLOCK)),
        np.empty(_BLOCK),
        np.empty(_BLOCK),
        np.empty(_BLOCK),
        np.empty(_BLOCK),
        np.empty(_BLOCK),
        np.empty(_BLOCK),
        np.empty(_BLOCK, dtype=np.bool_),
    )


@numba.njit(nogil=True, error_model="numpy")
def _solve_block(a, rows, t, n, warm, start, m, lam, scratch):
    """Row maxima and shifted normalisers of the rows ``a[rows]``, ``B`` of them.

    For ``t != 1``, an integer power ``n != 0`` and ``K >= 2`` (the caller
    checks): the fixed point (t > 1, K > 2, cold start) and the safeguarded
    Newton of :func:`_solve_row` / :func:`_solve_row_from` (for K = 2 the
    plain Newton of :func:`_solve2`, always cold), run on the ``B`` rows at
    once, each row stopping by its own tests.  `start` holds absolute
    starting normalisers (indexed like `a`) when `warm`.  Writes ``m[:B]``,
    ``lam[:B]`` and leaves the shifted rows in ``scratch[0]`` (K, B).
    Entries of `rows` may repeat (a short last block is padded with its
    last row): lanes do not interact.
    """
    dsh, f, fp, lo, hi, s, prev, active = scratch
    k = a.shape[1]
    for b in range(_BLOCK):
        m[b] = _row_max(a[rows[b]])
    for i in range(k):
        for b in range(_BLOCK):
            dsh[i, b] = a[rows[b], i] - m[b]
    if k == 2:
        warm = False
    upper = _upper_bracket(k, t)
    tm1 = t - 1.0
    for b in range(_BLOCK):
        lam[b] = min(max(start[rows[b]] - m[b], 0.0), upper) if warm else 0.0
    if t > 1.0 and k > 2 and not warm:
        for b in range(_BLOCK):
            s[b] = 1.0
            prev[b] = np.inf
            active[b] = True
        for _ in range(_FIXED_POINT_MAXITER):
            _block_fixed_point_sums(dsh, s, -tm1, n, f)
            left = False
            for b in range(_BLOCK):
                if not active[b]:
                    continue
                new = math.expm1(tm1 * math.log(f[b])) / tm1
                step = new - lam[b]
                lam[b] = new
                s[b] = 1.0 + tm1 * new
                target = 4.0 * _EPS * new
                rate = step / prev[b]
                if (
                    step <= target
                    or rate >= 1.0
                    or (
                        rate > 0.0
                        and math.log(target / step) / math.log(rate) > _FIXED_POINT_SPARE
                    )
                ):
                    active[b] = False
                else:
                    prev[b] = step
                    left = True
            if not left:
                break
    tol = 4.0 * _EPS * (math.sqrt(k) + 1.0)
    for b in range(_BLOCK):
        lo[b] = 0.0
        hi[b] = upper
        active[b] = True
    for _ in range(_NEWTON_MAXITER):
        _block_sums(dsh, lam, 1.0 - t, n, f, fp)
        left = False
        for b in range(_BLOCK):
            if not active[b]:
                continue
            if abs(f[b]) <= tol:
                active[b] = False
                continue
            old = lam[b]
            if k == 2:
                new, lo[b], hi[b] = _newton_step_plain(old, f[b], fp[b], lo[b], hi[b])
            else:
                new, lo[b], hi[b] = _newton_step(old, f[b], fp[b], t, lo[b], hi[b])
            lam[b] = new
            if abs(new - old) <= 2.0 * _EPS * abs(old) or hi[b] - lo[b] <= 4.0 * _EPS * hi[b]:
                active[b] = False
            else:
                left = True
        if not left:
            break


@numba.njit(nogil=True)
def _fill_probabilities(row, m, lam, t, n, out):
    if t == 1.0:
        for i in range(row.shape[0]):
            out[i] = math.exp((row[i] - m) - lam)
        return
    omt = 1.0 - t
    for i in range(row.shape[0]):
        z = omt * ((row[i] - m) - lam)
        out[i] = _texp(z, omt, n) if z > -1.0 else 0.0


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
def _class_terms(dl, y, logy, t1, t2):
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
def _loss_row(row, m, lam, t1, t2, ls, c, yrow, use_index, g, w):
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
        term, v, wi = _class_terms((row[i] - m) - lam, y, logy, t1, t2)
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
    lam = math.log1p(math.exp(d)) if t2 == 1.0 else _solve2(d, t2, _integer_power(t2))
    if a >= 0.0:
        d0 = d
        d1 = 0.0
    else:
        d0 = 0.0
        d1 = d
    y1s = (1.0 - ls) * y1 + 0.5 * ls
    y0s = (1.0 - ls) * (1.0 - y1) + 0.5 * ls
    term0, v0, w0 = _class_terms(d0 - lam, y0s, math.log(y0s) if y0s > 0.0 else -np.inf, t1, t2)
    term1, v1, w1 = _class_terms(d1 - lam, y1s, math.log(y1s) if y1s > 0.0 else -np.inf, t1, t2)
    return term0 + term1, v1 - w1 * (v0 + v1) / (w0 + w1)


# ---------------------------------------------------------------------------
# kernels: a serial and a parallel build of each (see _numba_config)
# ---------------------------------------------------------------------------


@numba.njit(nogil=True)
def _normalise_one(a, t, n, p, lam, want_p, r):
    m, lh = _solve_row(a[r], t, n)
    lam[r] = m + lh
    if want_p:
        _fill_probabilities(a[r], m, lh, t, n, p[r])


# Two kernel families: "general" solves one row at a time for any
# temperature; "blocked" solves rows in blocks for the integer-power
# temperatures (_kernel_family).  Python picks the family, so a fit compiles
# only the one it runs (each is several seconds of LLVM time).


# Each family's serial kernel is its row-range function itself, and the
# parallel kernel calls it on chunks: a wrapper layer would be one more
# module for LLVM to optimise with everything inlined (seconds per kernel).
# Both take (..., start, stop, n_chunks) so that launch() can hand them the
# same arguments; the parallel one splits [start, stop) into n_chunks
# chunks, the serial one ignores n_chunks (the parallel one passes its own
# n_chunks on, not a literal 1, which numba would type as a second signature).


@jit()
def _normalise_general_serial(a, t, p, lam, want_p, start, stop, n_chunks):
    n = _integer_power(t)
    for i in range(start, stop):
        _normalise_one(a, t, n, p, lam, want_p, i)


@jit()
def _normalise_blocked_serial(a, t, p, lam, want_p, start, stop, n_chunks):
    n = _integer_power(t)
    scratch = _block_scratch(a.shape[1])
    rows = np.empty(_BLOCK, dtype=np.int64)
    mb = np.empty(_BLOCK)
    lb = np.empty(_BLOCK)
    for r in range(start, stop, _BLOCK):
        _block_rows(rows, r, stop)
        _solve_block(a, rows, t, n, False, lam, mb, lb, scratch)
        for b in range(min(_BLOCK, stop - r)):
            lam[r + b] = mb[b] + lb[b]
            if want_p:
                _fill_probabilities(a[r + b], mb[b], lb[b], t, n, p[r + b])


@numba.njit(nogil=True)
def _chunk(start, stop, j, n_chunks):
    # Bounds of chunk j of n_chunks over [start, stop).
    n = stop - start
    return start + j * n // n_chunks, start + (j + 1) * n // n_chunks


@jit(parallel=True)
def _normalise_general_parallel(a, t, p, lam, want_p, start, stop, n_chunks):
    for j in numba.prange(n_chunks):
        lo, hi = _chunk(start, stop, j, n_chunks)
        _normalise_general_serial(a, t, p, lam, want_p, lo, hi, n_chunks)


@jit(parallel=True)
def _normalise_blocked_parallel(a, t, p, lam, want_p, start, stop, n_chunks):
    # Chunks rather than rows: each allocates its block scratch once.
    for j in numba.prange(n_chunks):
        lo, hi = _chunk(start, stop, j, n_chunks)
        _normalise_blocked_serial(a, t, p, lam, want_p, lo, hi, n_chunks)


@numba.njit(nogil=True)
def _rational_terms(t1, t2, n2):
    # The exponent c with p**(1 - t1) = x**c, x = 1 + (1 - t2)(d - lam)
    # (p = x**(1 / (1 - t2))), when it is an integer in [-16, 16] and t2 has
    # an integer power n2: then every unlabelled class's term is a rational
    # function of x (see _block_unlabelled_terms).  99: no.
    if n2 == 0:
        return 99
    c = n2 * (1.0 - t1)
    k = round(c)
    if abs(k) <= 16 and abs(c - k) <= 8.0 * _EPS * max(abs(c), 1.0):
        return int(k)
    return 99


@numba.njit(nogil=True, error_model="numpy")
def _block_unlabelled_terms(dsh, lam, labels, t2, n2, c, beta, vv, ww, total, s2, vsum):
    # Class terms of a block's rows for the classes with label y = 0 (all
    # but each row's class `labels[b]`, whose entries are left at 0):
    #   term = p**(2 - t1) / (2 - t1),  v = p**(1 - t1) p / x,  w = p / x,
    # the y <= 0 branch of _class_terms with p, p / x and p**(1 - t1) as
    # integer powers of x or 1 / x, no log or exp (vectorised over rows).
    omt = 1.0 - t2
    lanes = dsh.shape[1]
    for b in range(lanes):
        total[b] = 0.0
        s2[b] = 0.0
        vsum[b] = 0.0
    for i in range(dsh.shape[0]):
        for b in range(lanes):
            z = omt * (dsh[i, b] - lam[b])
            x = 1.0 + z
            if n2 > 0:
                # t2 < 1 (c >= 0): zero outside the support, x <= 0.
                keep = z > -1.0 and i != labels[b]
                w = _ipow_select(x, n2 - 1)
                p = w * x
                pa = _ipow_select(x, c)
            else:
                keep = i != labels[b]
                y = 1.0 / x
                p = _ipow_select(y, -n2)
                w = p * y
                pa = _ipow_select(y, -c) if c <= 0 else _ipow_select(x, c)
            p = p if keep else 0.0
            w = w if keep else 0.0
            pa = pa if keep else 0.0
            v = pa * w
            total[b] += p * pa / beta
            s2[b] += w
            vsum[b] += v
            vv[i, b] = v
            ww[i, b] = w


@jit()
def _loss_general_serial(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # lam_io: absolute normalisers, read as starting points when warm and
    # overwritten with this evaluation's.
    n2 = _integer_power(t2)
    w = np.empty(a.shape[1])
    for i in range(start, stop):
        if warm:
            m, lh = _solve_row_from(a[i], t2, n2, lam_io[i])
        else:
            m, lh = _solve_row(a[i], t2, n2)
        c = idx[i] if use_index else 0
        yrow = yprob[0] if use_index else yprob[i]
        loss[i] = _loss_row(a[i], m, lh, t1, t2, ls, c, yrow, use_index, g[i], w)
        lam_io[i] = m + lh


@jit()
def _loss_blocked_serial(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # As _loss_general_serial, for the integer-power t2 of _kernel_family.
    k = a.shape[1]
    n2 = _integer_power(t2)
    w = np.empty(k)
    scratch = _block_scratch(k)
    rows = np.empty(_BLOCK, dtype=np.int64)
    mb = np.empty(_BLOCK)
    lb = np.empty(_BLOCK)
    c_exp = _rational_terms(t1, t2, n2)
    rational = use_index and ls == 0.0 and c_exp != 99
    if rational:
        labels = np.empty(_BLOCK, dtype=np.int64)
        vv = np.empty((k, _BLOCK))
        ww = np.empty((k, _BLOCK))
        total = np.empty(_BLOCK)
        s2 = np.empty(_BLOCK)
        vsum = np.empty(_BLOCK)
    for r in range(start, stop, _BLOCK):
        _block_rows(rows, r, stop)
        _solve_block(a, rows, t2, n2, warm, lam_io, mb, lb, scratch)
        count = min(_BLOCK, stop - r)
        if not rational:
            for b in range(count):
                i = r + b
                c = idx[i] if use_index else 0
                yrow = yprob[0] if use_index else yprob[i]
                loss[i] = _loss_row(a[i], mb[b], lb[b], t1, t2, ls, c, yrow, use_index, g[i], w)
                lam_io[i] = mb[b] + lb[b]
            continue
        for b in range(_BLOCK):
            labels[b] = idx[rows[b]]
        dsh = scratch[0]
        _block_unlabelled_terms(dsh, lb, labels, t2, n2, c_exp, 2.0 - t1, vv, ww, total, s2, vsum)
        for b in range(count):
            i = r + b
            c = labels[b]
            # The labelled class (y = 1) by the general formula.
            term, v, wc = _class_terms(dsh[c, b] - lb[b], 1.0, 0.0, t1, t2)
            vv[c, b] = v
            ww[c, b] = wc
            ratio = (vsum[b] + v) / (s2[b] + wc)
            for j in range(k):
                g[i, j] = vv[j, b] - ww[j, b] * ratio
            loss[i] = total[b] + term
            lam_io[i] = mb[b] + lb[b]


@jit(parallel=True)
def _loss_general_parallel(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # Chunks rather than rows so that the scratch arrays are allocated per
    # chunk.
    for j in numba.prange(n_chunks):
        lo, hi = _chunk(start, stop, j, n_chunks)
        _loss_general_serial(
            a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, lo, hi, n_chunks
        )


@jit(parallel=True)
def _loss_blocked_parallel(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # Chunks rather than rows so that the scratch arrays are allocated per
    # chunk.
    for j in numba.prange(n_chunks):
        lo, hi = _chunk(start, stop, j, n_chunks)
        _loss_blocked_serial(
            a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, lo, hi, n_chunks
        )


def _kernel_family(k, t):
    """'blocked' or 'general': the kernel family for K classes at temperature t.

    The block solver covers the integer-power temperatures with K >= 2; the
    others need log1p/exp per element, which do not vectorise here.
    """
    blocked = k >= 2 and t != 1.0 and _integer_power.py_func(t) != 0
    return "blocked" if blocked else "general"


def _n_chunks(n):
    # Enough chunks to balance the threads, each at least one block long.
    return max(1, min(n // _BLOCK, 8 * numba.get_num_threads()))


_NORMALISE_KERNELS = {
    "general": (_normalise_general_serial, _normalise_general_parallel),
    "blocked": (_normalise_blocked_serial, _normalise_blocked_parallel),
}
_LOSS_KERNELS = {
    "general": (_loss_general_serial, _loss_general_parallel),
    "blocked": (_loss_blocked_serial, _loss_blocked_parallel),
}


@jit()
def _binary_serial(a, y, t1, t2, ls, loss, grad):
    for r in range(a.shape[0]):
        loss[r], grad[r] = _binary_row(a[r], y[r], t1, t2, ls)


@jit(parallel=True)
def _binary_parallel(a, y, t1, t2, ls, loss, grad):
    for r in numba.prange(a.shape[0]):
        loss[r], grad[r] = _binary_row(a[r], y[r], t1, t2, ls)


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------


def _check_scalar(name, value, low, high):
    if isinstance(value, bool | np.bool_):
        raise TypeError(f"{name} must be a real number, got {value!r}")
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a real number, got {value!r}") from None
    if not (low <= v <= high):
        raise ValueError(f"{name} must be in [{low:g}, {high:g}], got {value!r}")
    return v


def _as_float_c(x):
    # One dtype/layout/writeable combination for every call: each different
    # one would be a new numba compilation.
    return np.require(x, dtype=np.float64, requirements=["C", "A", "W"])


def _check_finite(name, x):
    if not np.isfinite(x).all():
        if np.isnan(x).any():
            raise ValueError(f"{name} contain NaN")
        raise ValueError(f"{name} contain infinite values")


def _as_activations(activations):
    a = np.asarray(activations)
    if a.dtype.kind not in "biuf":
        raise TypeError(f"activations must be real numbers, got dtype {a.dtype}")
    if a.ndim not in (1, 2):
        raise ValueError(f"activations must be 1-D (one row) or 2-D (n, K), got {a.ndim}-D")
    one_row = a.ndim == 1
    a = _as_float_c(a.reshape(1, -1) if one_row else a)
    if a.shape[1] == 0:
        raise ValueError("activations need at least one class (K >= 1)")
    _check_finite("activations", a)
    return a, one_row


def _as_labels(labels, n, k, one_row):
    """Return (index labels (n,) int64 or None, probability rows (n, K) or None)."""
    y = np.asarray(labels)
    if y.dtype.kind not in "biuf":
        raise TypeError(f"labels must be numbers, got dtype {y.dtype}")
    index_ndim = 0 if one_row else 1
    if y.ndim == index_ndim:
        y = y.reshape(-1)
        if y.shape[0] != n:
            raise ValueError(f"labels has {y.shape[0]} rows, activations {n}")
        if y.dtype.kind == "f":
            _check_finite("labels", y)
            if np.any(y != np.round(y)):
                raise ValueError("class-index labels must be whole numbers")
        if n and (y.min() < 0 or y.max() >= k):
            raise ValueError(
                f"class-index labels must be in [0, {k - 1}], got values in [{y.min()}, {y.max()}]"
            )
        return np.require(y, dtype=np.int64, requirements=["C", "A", "W"]), None
    if y.ndim == index_ndim + 1:
        y = _as_float_c(y.reshape(1, -1) if one_row else y)
        if y.shape != (n, k):
            raise ValueError(f"probability labels must have shape {(n, k)}, got {y.shape}")
        _check_finite("labels", y)
        if np.any(y < 0):
            raise ValueError("probability labels must be >= 0")
        if n and np.max(np.abs(y.sum(axis=1) - 1.0)) > _LABEL_SUM_ATOL:
            raise ValueError(f"probability label rows must sum to 1 (within {_LABEL_SUM_ATOL:g})")
        return None, y
    raise ValueError(
        "labels must be class indices, shape (n,), or probability rows, shape "
        f"(n, K); got shape {y.shape} for activations with {n} rows and {k} classes"
    )


# ---------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------


def log_t(u, t):
    """Tempered logarithm ``log_t(u) = (u**(1 - t) - 1) / (1 - t)``.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 2.

    Parameters
    ----------
    u : array_like of float, any shape
        Arguments, ``u >= 0`` (``log_t(0) = -1 / (1 - t)`` for ``t < 1`` and
        ``-inf`` for ``t >= 1``).  NaN propagates.
    t : float in [0, 10]
        Temperature; ``t = 1`` is exactly :func:`numpy.log`.

    Returns
    -------
    out : ndarray of float64, shape of `u` (a float for scalar input)
        Computed as ``expm1((1 - t) log u) / (1 - t)``, accurate as t -> 1.

    Raises
    ------
    ValueError
        If any ``u < 0`` or `t` is outside [0, 10].
    """
    t = _check_scalar("t", t, 0.0, _T_MAX)
    u = np.asarray(u, dtype=np.float64)
    if np.any(u < 0):
        raise ValueError("log_t is defined for u >= 0 only")
    with np.errstate(divide="ignore"):
        lu = np.log(u)
    out = lu if t == 1.0 else np.expm1((1.0 - t) * lu) / (1.0 - t)
    return out[()] if out.ndim == 0 else out


def exp_t(u, t):
    """Tempered exponential ``exp_t(u) = [1 + (1 - t) u]_+ ** (1 / (1 - t))``.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 2.

    Parameters
    ----------
    u : array_like of float, any shape
        Arguments.  NaN propagates.
    t : float in [0, 10]
        Temperature; ``t = 1`` is exactly :func:`numpy.exp`.  For ``t < 1`` the
        result is 0 where ``u <= -1 / (1 - t)`` (finite support).  For ``t > 1``
        there is a pole at ``u = 1 / (t - 1)``: the result grows without bound
        as u approaches it from below and is ``+inf`` at and beyond it (the
        clipped base is 0, raised to a negative power).  The tempered softmax
        never gets there, since it evaluates ``exp_t`` at shifted activations
        ``<= 0``.

    Returns
    -------
    out : ndarray of float64, shape of `u` (a float for scalar input)
        Computed as ``exp(log1p((1 - t) u) / (1 - t))``, accurate as t -> 1.

    Raises
    ------
    ValueError
        If `t` is outside [0, 10].
    """
    t = _check_scalar("t", t, 0.0, _T_MAX)
    u = np.asarray(u, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if t == 1.0:
            out = np.exp(u)
        else:
            z = (1.0 - t) * u
            inside = z > -1.0
            out = np.exp(np.log1p(np.where(inside, z, 0.0)) / (1.0 - t))
            out = np.where(inside, out, 0.0 if t < 1.0 else np.inf)
            out = np.where(np.isnan(u), np.nan, out)
    return out[()] if out.ndim == 0 else out


def tempered_normaliser(activations, t):
    """Normaliser ``lambda`` of the tempered softmax, one per row.

    ``lambda`` solves ``sum_i exp_t(a_i - lambda) = 1`` (Amid, Warmuth, Anil &
    Koren, NeurIPS 2019, section 3); the algorithm is described in the module
    docstring.  ``lambda(a + c) = lambda(a) + c``; at ``t = 1`` it is the
    log-sum-exp.

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    t : float in [0, 10]
        Temperature of the tempered exponential.

    Returns
    -------
    lam : ndarray of float64, shape (n,) (a float for 1-D input)

    Raises
    ------
    ValueError
        If the activations contain NaN or infinite values, are not 1-D or
        2-D, or `t` is outside [0, 10].
    """
    a, one_row = _as_activations(activations)
    t = _check_scalar("t", t, 0.0, _T_MAX)
    lam = np.empty(a.shape[0])
    dummy = np.empty((1, 1))
    launch(
        *_NORMALISE_KERNELS[_kernel_family(a.shape[1], t)],
        a.size,
        a,
        t,
        dummy,
        lam,
        False,
        0,
        a.shape[0],
        _n_chunks(a.shape[0]),
    )
    return float(lam[0]) if one_row else lam


def tempered_softmax(activations, t):
    """Tempered softmax ``p_i = exp_t(a_i - lambda(a))`` of each row.

    Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered Logistic Loss Based on
    Bregman Divergences", NeurIPS 2019, section 3.  ``t = 1`` is the ordinary
    softmax; ``t > 1`` has heavier (polynomial) tails; ``t < 1`` has finite
    support and ``t = 0`` is sparsemax (Martins & Astudillo, ICML 2016).

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    t : float in [0, 10]
        Temperature.

    Returns
    -------
    p : ndarray of float64, shape of `activations`
        Rows in [0, 1] that sum to 1 within ``4 eps (sqrt(K) + 1)`` (checked
        to 1e-12 for K up to 50,000, t in (0, 5], activations up to 1e3).
        Never NaN.  Invariant under adding a constant to a row.

    Raises
    ------
    ValueError
        If the activations contain NaN or infinite values, are not 1-D or
        2-D, or `t` is outside [0, 10].
    """
    a, one_row = _as_activations(activations)
    t = _check_scalar("t", t, 0.0, _T_MAX)
    p = np.empty_like(a)
    lam = np.empty(a.shape[0])
    launch(
        *_NORMALISE_KERNELS[_kernel_family(a.shape[1], t)],
        a.size,
        a,
        t,
        p,
        lam,
        True,
        0,
        a.shape[0],
        _n_chunks(a.shape[0]),
    )
    return p[0] if one_row else p


def tempered_sigmoid(activations, t):
    """Probability of class 1 under the tempered softmax of ``(0, a)``.

    The binary model's probability: ``tempered_softmax([0, a], t)[1]`` for
    each entry ``a``; ``t = 1`` is the logistic sigmoid.

    Parameters
    ----------
    activations : array_like of float, shape (n,)
        Finite class-1 activations (class 0 has activation 0).
    t : float in [0, 10]
        Temperature.

    Returns
    -------
    p1 : ndarray of float64, shape (n,), values in [0, 1]
    """
    a = np.asarray(activations, dtype=np.float64)
    if a.ndim != 1:
        raise ValueError(f"activations must be 1-D, got {a.ndim}-D")
    pairs = np.zeros((a.shape[0], 2))
    pairs[:, 1] = a
    return tempered_softmax(pairs, t)[:, 1].copy()


def bitempered_loss(activations, labels, t1, t2, label_smoothing=0.0):
    """Bi-tempered logistic loss per row and its gradient w.r.t. activations.

    The Bregman form of Amid, Warmuth, Anil & Koren, "Robust Bi-Tempered
    Logistic Loss Based on Bregman Divergences", NeurIPS 2019, section 4::

        L = sum_i [ y_i (log_t1 y_i - log_t1 p_i)
                    - (y_i**(2 - t1) - p_i**(2 - t1)) / (2 - t1) ],
        p = tempered_softmax(activations, t2).

    ``t1 = t2 = 1`` is the cross-entropy with gradient ``p - y``.  For
    ``t1 < 1`` the loss is bounded: ``0 <= L <= 1 / (1 - t1)`` for every
    probability label (the supremum is approached when the true class gets
    probability 0 and another class takes all the mass).

    Parameters
    ----------
    activations : array_like of float, shape (n, K) or (K,)
        Finite activations; a 1-D array is one row.  K >= 1.
    labels : array_like
        Class indices, shape (n,) (a scalar for 1-D activations), integers in
        [0, K - 1]; or probability rows, shape (n, K) ((K,) for 1-D
        activations), entries >= 0 summing to 1.
    t1 : float in [0, 1]
        Temperature of the logarithm (``t1 < 1``: bounded loss).  Values above
        1 make the loss unbounded and grow faster than the cross-entropy, the
        opposite of the method's purpose, and are rejected.
    t2 : float in [0, 10]
        Temperature of the softmax (``t2 > 1``: heavy tails).  For ``t2 < 1``
        classes can have probability exactly 0; then ``t1 = 1`` gives an
        infinite loss for a true class outside the support (never NaN).
    label_smoothing : float in [0, 1], default=0.0
        ``y <- (1 - label_smoothing) y + label_smoothing / K``.

    Returns
    -------
    loss : ndarray of float64, shape (n,) (a float for 1-D activations)
        Per-row loss, >= 0.
    grad : ndarray of float64, shape (n, K) ((K,) for 1-D activations)
        ``d loss_r / d activations[r, j]``; rows sum to 0.

    Raises
    ------
    ValueError
        NaN or infinite activations or labels, labels out of range or of the
        wrong shape, or a temperature / smoothing outside its range.
    """
    a, one_row = _as_activations(activations)
    loss, grad = _multiclass_loss(a, labels, one_row, t1, t2, label_smoothing, None, False)
    if one_row:
        return float(loss[0]), grad[0]
    return loss, grad


def _multiclass_loss(a, labels, one_row, t1, t2, label_smoothing, normalisers, warm):
    """Validate the rest and run the loss kernel on activations `a` (n, K).

    `normalisers`: None, or an (n,) float64 C-contiguous writeable array of
    absolute normalisers, read as Newton's starting points when `warm` and
    overwritten with the new ones.
    """
    n, k = a.shape
    t1 = _check_scalar("t1", t1, 0.0, 1.0)
    t2 = _check_scalar("t2", t2, 0.0, _T_MAX)
    ls = _check_scalar("label_smoothing", label_smoothing, 0.0, 1.0)
    idx, yprob = _as_labels(labels, n, k, one_row)
    use_index = idx is not None
    if use_index:
        yprob = np.empty((1, k))
    else:
        idx = np.zeros(1, dtype=np.int64)
    if normalisers is None:
        warm = False
        normalisers = np.empty(n)
    loss = np.empty(n)
    grad = np.empty_like(a)
    launch(
        *_LOSS_KERNELS[_kernel_family(k, t2)],
        a.size,
        a,
        idx,
        yprob,
        use_index,
        t1,
        t2,
        ls,
        bool(warm),
        normalisers,
        loss,
        grad,
        0,
        n,
        _n_chunks(n),
    )
    return loss, grad


def bitempered_loss_warm(activations, labels, t1, t2, label_smoothing, normalisers, warm):
    """:func:`bitempered_loss` for 2-D activations, reusing normalisers.

    An optimiser evaluates the loss at a sequence of nearby parameters; each
    row's tempered-softmax normaliser moves little between them, and Newton
    started at the previous value needs about half the passes of a cold
    start (and no fixed-point phase).  The result differs from a cold start
    by no more than the solver's stopping tolerance.

    Parameters
    ----------
    activations, labels, t1, t2, label_smoothing
        As :func:`bitempered_loss`; `activations` must be 2-D (n, K).
    normalisers : ndarray of float64, shape (n,), C-contiguous, writeable
        Absolute normalisers of a previous call on nearby activations (read
        only when `warm`); overwritten with this call's.
    warm : bool
        Whether `normalisers` holds starting points.

    Returns
    -------
    loss : ndarray of float64, shape (n,)
    grad : ndarray of float64, shape (n, K)
    """
    a, one_row = _as_activations(activations)
    if one_row:
        raise ValueError("bitempered_loss_warm needs 2-D activations (n, K)")
    lam = normalisers
    if not (
        isinstance(lam, np.ndarray)
        and lam.dtype == np.float64
        and lam.shape == (a.shape[0],)
        and lam.flags.c_contiguous
        and lam.flags.writeable
    ):
        raise ValueError(
            f"normalisers must be a writeable C-contiguous float64 array of shape ({a.shape[0]},)"
        )
    return _multiclass_loss(a, labels, False, t1, t2, label_smoothing, lam, warm)


def bitempered_loss_binary(activations, labels, t1, t2, label_smoothing=0.0):
    """Bi-tempered loss of the binary model with activations ``(0, a)``.

    Equal to ``bitempered_loss(column_stack([0, a]), [1 - y, y], ...)``: for
    an integer ``1 / (1 - t2)`` it is computed that way, in chunks (the
    vectorised block solver), otherwise by scalar code per row; see
    :func:`bitempered_loss` for the loss (Amid, Warmuth, Anil & Koren,
    NeurIPS 2019).

    Parameters
    ----------
    activations : array_like of float, shape (n,)
        Finite class-1 activations ``a`` (class 0 has activation 0).
    labels : array_like of float, shape (n,)
        Probability of class 1, in [0, 1] (0/1 for hard labels).
    t1 : float in [0, 1]
    t2 : float in [0, 10]
    label_smoothing : float in [0, 1], default=0.0
        ``y <- (1 - label_smoothing) y + label_smoothing / 2`` per class.

    Returns
    -------
    loss : ndarray of float64, shape (n,)
        Per-row loss, >= 0.
    dloss_da : ndarray of float64, shape (n,)
        Derivative of each row's loss w.r.t. its activation ``a``.

    Raises
    ------
    ValueError
        As :func:`bitempered_loss`; labels outside [0, 1].
    """
    a = np.asarray(activations)
    if a.dtype.kind not in "biuf":
        raise TypeError(f"activations must be real numbers, got dtype {a.dtype}")
    if a.ndim != 1:
        raise ValueError(f"activations must be 1-D, shape (n,), got {a.ndim}-D")
    a = _as_float_c(a)
    _check_finite("activations", a)
    y = np.asarray(labels)
    if y.dtype.kind not in "biuf":
        raise TypeError(f"labels must be numbers, got dtype {y.dtype}")
    y = _as_float_c(y)
    if y.shape != a.shape:
        raise ValueError(f"labels must have shape {a.shape}, got {y.shape}")
    _check_finite("labels", y)
    if np.any((y < 0) | (y > 1)):
        raise ValueError("binary labels must be in [0, 1]")
    t1 = _check_scalar("t1", t1, 0.0, 1.0)
    t2 = _check_scalar("t2", t2, 0.0, _T_MAX)
    ls = _check_scalar("label_smoothing", label_smoothing, 0.0, 1.0)
    n = a.shape[0]
    loss = np.empty(n)
    grad = np.empty(n)
    if _kernel_family(2, t2) == "general":
        launch(_binary_serial, _binary_parallel, 2 * n, a, y, t1, t2, ls, loss, grad)
        return loss, grad
    # Integer-power t2: the block solver on the pairs (0, a), vectorised over
    # rows, is about twice as fast as the scalar row code (0.23 against 0.44
    # us a row, one thread); 0/1 labels without smoothing also get the
    # rational unlabelled-class terms.  Chunks bound the (rows, 2)
    # temporaries.
    hard = ls == 0.0 and bool(np.all((y == 0.0) | (y == 1.0)))
    for start in range(0, n, _BINARY_CHUNK_ROWS):
        stop = min(start + _BINARY_CHUNK_ROWS, n)
        pairs = np.zeros((stop - start, 2))
        pairs[:, 1] = a[start:stop]
        yc = y[start:stop]
        labels_c = yc.astype(np.int64) if hard else np.column_stack([1.0 - yc, yc])
        lc, gc = _multiclass_loss(pairs, labels_c, False, t1, t2, ls, None, False)
        loss[start:stop] = lc
        grad[start:stop] = gc[:, 1]
    return loss, grad
