"""The tempered normaliser and bi-tempered loss in vectorised numpy.

The same algorithms as the numba kernels of :mod:`.tempered_rows` and
:mod:`.tempered_loss` (Amid, Warmuth, Anil & Koren, NeurIPS 2019; the
definitions are in :mod:`.tempered_math`), run on all rows at once with a
mask of the rows still iterating.  They need no compile, so
:mod:`.tempered_dispatch` runs them where a compile cannot pay off: small
calls, and a fit's passes until the kernel is compiled in the background.

Per row the arithmetic follows the kernels (sums over classes in class
order, the same Newton steps, bracket and stopping tests), except that
numpy's ``log`` and ``exp`` may round differently from the kernels' and the fixed-point
start of ``t > 1`` is skipped (Newton from ``lambda_hat = 0`` is monotone
too): results agree with the kernels to the normaliser's stopping tolerance,
not bitwise.  Each row's result does not depend on the other rows.
Like the kernels, nothing here validates its input.
"""

from __future__ import annotations

import math

import numpy as np

from .tempered_params import (
    EPS,
    FIXED_POINT_MAXITER,
    FIXED_POINT_SPARE,
    HUGE,
    NEWTON_MAXITER,
    integer_power,
)

__all__ = ["normalise", "multiclass_loss", "binary_loss", "shifted_normalisers"]


def _upper_bracket(k, t):
    # -log_t(1/K), as tempered_math.upper_bracket.
    if k <= 1:
        return 0.0
    return min(math.expm1((t - 1.0) * math.log(k)) / (t - 1.0), HUGE)


def _column_sums(x, first=0.0):
    # first + the sum over classes, added in class order (as the kernels add
    # them), so that a row's sum does not depend on how many rows share the
    # call.
    total = first + x[:, 0]
    for i in range(1, x.shape[1]):
        total += x[:, i]
    return total


def _ipow(x, n):
    # tempered_math.ipow on an array: the same products in the same order.
    result = x if n & 1 else np.ones_like(x)
    for bit in (2, 4, 8, 16):
        x = x * x
        if n & bit:
            result = result * x
    return result


def _terms(dl, t):
    # p = exp_t(dl) inside the support (0 outside) and p**t = p / (1 + z);
    # an integer power 1 / (1 - t) as a power, like tempered_math.texp.
    omt = 1.0 - t
    z = omt * dl
    inside = z > -1.0
    zc = np.where(inside, z, 0.0)
    n = integer_power(t)
    x = 1.0 + zc
    if n > 0:
        pt = _ipow(x, n - 1)
        p = pt * x
    elif n < 0:
        y = 1.0 / x
        p = _ipow(y, -n)
        pt = p * y
    else:
        p = np.exp(np.log1p(zc) / omt)
        pt = p / x
    return np.where(inside, p, 0.0), np.where(inside, pt, 0.0)


def _newton_step(lam, f, fp, t, plain):
    # tempered_rows.newton_step (on log_t of the sum) or newton_step_plain.
    if plain:
        return np.where(fp > 0.0, lam + f / fp, -np.inf)
    big_f = f + 1.0
    e = np.expm1((1.0 - t) * np.log(np.where(big_f > 0.0, big_f, 1.0)))
    new = lam + big_f * e / ((1.0 - t) * (1.0 + e) * fp)
    return np.where((fp > 0.0) & (f > -1.0), new, -np.inf)


def _texp(z, t):
    # tempered_math.texp: (1 + z)**(1 / (1 - t)), z > -1.
    n = integer_power(t)
    if n > 0:
        return _ipow(1.0 + z, n)
    if n < 0:
        return _ipow(1.0 / (1.0 + z), -n)
    return np.exp(np.log1p(z) / (1.0 - t))


def _fixed_point(d, t):
    # tempered_rows._fixed_point (t > 1) on every row, each stopping by its
    # own tests.
    tm1 = t - 1.0
    n = d.shape[0]
    lam, s, prev = np.zeros(n), np.ones(n), np.full(n, np.inf)
    rows = np.arange(n)
    for _ in range(FIXED_POINT_MAXITER):
        if rows.size == 0:
            break
        z_sum = _column_sums(_texp(-tm1 * d[rows] / s[rows, None], t))
        new = np.expm1(tm1 * np.log(z_sum)) / tm1
        step = new - lam[rows]
        lam[rows] = new
        s[rows] = 1.0 + tm1 * new
        target = 4.0 * EPS * new
        rate = step / prev[rows]
        spare = np.log(target / step) / np.log(np.where(rate > 0.0, rate, 0.5))
        done = (step <= target) | (rate >= 1.0) | ((rate > 0.0) & (spare > FIXED_POINT_SPARE))
        prev[rows] = step
        rows = rows[~done]
    return lam


def shifted_normalisers(d, t, start=None):
    """Shifted normalisers ``lambda_hat`` (n,) of shifted rows ``d`` (n, K), ``d <= 0``.

    `start` (n,), optional: shifted starting points (a fit's previous
    normalisers minus the row maxima), clipped to the bracket.
    """
    n, k = d.shape
    if t == 1.0:
        return np.log(_column_sums(np.exp(d)))
    if k == 1:
        return np.zeros(n)
    if k == 2:
        # solve2's order: the row's maximum (0) first.
        d = np.column_stack([np.zeros(n), d.min(axis=1)])
    hi_value = _upper_bracket(k, t)
    if k > 2 and start is not None:
        lam = np.clip(start, 0.0, hi_value)
    elif k > 2 and t > 1.0:
        lam = _fixed_point(d, t)
    else:
        lam = np.zeros(n)
    lo, hi = np.zeros(n), np.full(n, hi_value)
    tol = 4.0 * EPS * (math.sqrt(k) + 1.0)
    rows = np.arange(n)
    for _ in range(NEWTON_MAXITER):
        if rows.size == 0:
            break
        p, pt = _terms(d[rows] - lam[rows, None], t)
        f = _column_sums(p, -1.0)
        fp = _column_sums(pt)
        solved = np.abs(f) <= tol
        old = lam[rows]
        new = _newton_step(old, f, fp, t, k == 2)
        right = f > 0.0
        lo_r = np.where(right, old, lo[rows])
        hi_r = np.where(right, hi[rows], old)
        new = np.where((new > lo_r) & (new < hi_r), new, lo_r + 0.5 * (hi_r - lo_r))
        stop = (np.abs(new - old) <= 2.0 * EPS * np.abs(old)) | (hi_r - lo_r <= 4.0 * EPS * hi_r)
        moving = ~solved
        lam[rows[moving]] = new[moving]
        lo[rows], hi[rows] = lo_r, hi_r
        rows = rows[moving & ~stop]
    return lam


def probabilities(d, lam, t):
    """Tempered softmax ``exp_t(d - lam)`` of rows `d` (n, K) and normalisers `lam` (n,)."""
    if t == 1.0:
        return np.exp(d - lam[:, None])
    return _terms(d - lam[:, None], t)[0]


def _bregman_gap(delta, alpha, beta):
    # tempered_loss._bregman_gap, both branches evaluated.
    small = np.abs(delta) < 0.1
    ds = np.where(small, delta, 0.0)
    series = np.zeros_like(delta)
    a_pow = b_pow = fact = 1.0
    d_pow = ds
    for k in range(2, 13):
        a_pow *= alpha
        b_pow *= beta
        d_pow = d_pow * ds
        fact *= k
        series += (b_pow - a_pow) * d_pow / fact
    dl = np.where(small, 0.0, delta)
    first = np.expm1(beta * dl) / beta
    closed = first - dl if alpha == 0.0 else first - np.expm1(alpha * dl) / alpha
    return np.where(small, series, closed)


def _class_terms(dl, y, logy, t1, t2):
    # tempered_loss.class_terms on arrays: (term, v, w).
    alpha, beta = 1.0 - t1, 2.0 - t1
    if t2 == 1.0:
        inside = np.ones(dl.shape, dtype=bool)
        ell, x = dl, np.ones_like(dl)
    else:
        z = (1.0 - t2) * dl
        inside = z > -1.0
        zc = np.where(inside, z, 0.0)
        x = 1.0 + zc
        ell = np.where(inside, np.log1p(zc) / (1.0 - t2), -np.inf)
    p = np.exp(ell)
    p_alpha = np.ones_like(dl) if alpha == 0.0 else np.where(inside, np.exp(alpha * ell), 0.0)
    w = np.where(inside, p / x, 0.0)
    v = np.where(inside, p_alpha / x * (p - y), 0.0)
    positive = y > 0.0
    delta = np.where(positive, ell - np.where(positive, logy, 0.0), 0.0)
    big = delta > 1.0
    db = np.where(big, delta, 0.0)
    gap = db if alpha == 0.0 else np.exp(alpha * logy) * np.expm1(alpha * db) / alpha
    term_big = (p * p_alpha - np.exp(beta * logy)) / beta - y * gap
    term_near = np.exp(beta * logy) * _bregman_gap(np.where(big, 0.0, delta), alpha, beta)
    term = np.where(positive, np.where(big, term_big, term_near), p * p_alpha / beta)
    return np.maximum(term, 0.0), v, w


def _log_or_minf(y):
    return np.where(y > 0.0, np.log(np.where(y > 0.0, y, 1.0)), -np.inf)


def loss_and_gradient(d, lam, y, t1, t2):
    """Loss (n,) and gradient (n, K) of shifted rows `d` with label rows `y` (n, K).

    `lam` holds the shifted normalisers; `y` the (smoothed) label
    probabilities of each class.
    """
    logy = _log_or_minf(y)
    term, v, w = _class_terms(d - lam[:, None], y, logy, t1, t2)
    ratio = _column_sums(v) / _column_sums(w)
    return _column_sums(term), v - w * ratio[:, None]


# The entry points below take the arguments of the dispatch functions of the
# same names and write into the same output arrays.


def normalise(a, t, p, lam, want_p):
    """:func:`.tempered_dispatch.normalise` in numpy."""
    with np.errstate(all="ignore"):
        _normalise(a, t, p, lam, want_p)


def _normalise(a, t, p, lam, want_p):
    m = a.max(axis=1)
    d = a - m[:, None]
    lh = shifted_normalisers(d, t)
    lam[:] = m + lh
    if want_p:
        p[:] = probabilities(d, lh, t)


def _label_rows(n, k, idx, yprob, use_index, ls):
    # Smoothed label probabilities (n, K), as loss_row forms them.
    keep, base = 1.0 - ls, ls / k
    if use_index:
        y = np.full((n, k), base)
        y[np.arange(n), idx] = keep + base
        return y
    return keep * yprob + base


def multiclass_loss(a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad):
    """:func:`.tempered_dispatch.multiclass_loss` in numpy."""
    with np.errstate(all="ignore"):
        _multiclass_loss(a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad)


def _multiclass_loss(a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad):
    n, k = a.shape
    m = a.max(axis=1)
    d = a - m[:, None]
    lh = shifted_normalisers(d, t2, lam - m if warm else None)
    y = _label_rows(n, k, idx, yprob, use_index, ls)
    loss[:], grad[:] = loss_and_gradient(d, lh, y, t1, t2)
    lam[:] = m + lh


def binary_loss(a, y, t1, t2, ls, loss, grad):
    """:func:`.tempered_dispatch.binary_loss` in numpy: rows (0, a)."""
    with np.errstate(all="ignore"):
        _binary_loss(a, y, t1, t2, ls, loss, grad)


def _binary_loss(a, y, t1, t2, ls, loss, grad):
    # tempered_loss._binary_row on every row.
    d = -np.abs(a)
    if t2 == 1.0:
        lam = np.log1p(np.exp(d))
    else:
        lam = shifted_normalisers(np.column_stack([np.zeros_like(d), d]), t2)
    right = a >= 0.0
    y1 = y.astype(np.float64)
    y1s = (1.0 - ls) * y1 + 0.5 * ls
    y0s = (1.0 - ls) * (1.0 - y1) + 0.5 * ls
    term0, v0, w0 = _class_terms(np.where(right, d, 0.0) - lam, y0s, _log_or_minf(y0s), t1, t2)
    term1, v1, w1 = _class_terms(np.where(right, 0.0, d) - lam, y1s, _log_or_minf(y1s), t1, t2)
    loss[:] = term0 + term1
    grad[:] = v1 - w1 * (v0 + v1) / (w0 + w1)
