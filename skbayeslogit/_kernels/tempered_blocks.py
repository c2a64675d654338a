"""The tempered-softmax normaliser of 16 rows at once, for integer powers.

The "blocked" kernel family (see :mod:`.tempered_dispatch`): when
``1 / (1 - t)`` is an integer n (|n| <= 16: t = 0.5, 0.8, 1.2, 1.25, 1.5,
2, ...) ``exp_t`` is a polynomial or reciprocal polynomial, and the
iterations of :mod:`.tempered_rows` (the fixed point of Amid, Warmuth, Anil
& Koren, NeurIPS 2019, then safeguarded Newton) run on 16 rows at once with
the loop over rows innermost, so that LLVM vectorises it; each row keeps its
own iteration and stopping tests and its sums over classes in order, so a
row's result does not depend on its neighbours and is bitwise the result
of the one-row solver.  Other temperatures solve row by row.
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
    ipow_select,
    row_max,
    upper_bracket,
)
from .tempered_params import FIXED_POINT_MAXITER, FIXED_POINT_SPARE, NEWTON_MAXITER
from .tempered_rows import (
    fill_probabilities,
    newton_step,
    newton_step_plain,
)

# Rows solved together by the block solver.  The loops over a block's rows
# are innermost, so LLVM vectorises them (4 doubles per AVX2 instruction)
# while each row's sums still run over its classes in order.  16 rows:
# measured fastest per element on AVX2 and AVX-512 among 8, 16 and 32
# (figures in benchmarks/README.md).
BLOCK = 16


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
                q = ipow_select(x, n - 1)
                inside = z > -1.0
                f[b] += q * x if inside else 0.0
                fp[b] += q if inside else 0.0
    else:
        # t > 1: z >= 0 for d <= 0 <= lam, every class is in the support.
        for i in range(dsh.shape[0]):
            for b in range(lanes):
                y = 1.0 / (1.0 + omt * (dsh[i, b] - lam[b]))
                p = ipow_select(y, -n)
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
            total[b] += ipow_select(1.0 / (1.0 + omt * dsh[i, b] / s[b]), -n)


@numba.njit(nogil=True)
def block_rows(rows, r, stop):
    # Rows r .. r + B - 1 of a chunk ending at stop; a short block repeats its
    # last row, so that every row of an integer-power case takes the same
    # code (and gets the same bits) whatever its position.
    for b in range(BLOCK):
        rows[b] = min(r + b, stop - 1)


@numba.njit(nogil=True)
def block_scratch(k):
    """Work arrays of :func:`solve_block`: (shifted rows (K, B), 7 lane arrays)."""
    return (
        np.empty((k, BLOCK)),
        np.empty(BLOCK),
        np.empty(BLOCK),
        np.empty(BLOCK),
        np.empty(BLOCK),
        np.empty(BLOCK),
        np.empty(BLOCK),
        np.empty(BLOCK, dtype=np.bool_),
    )


@numba.njit(nogil=True)
def _shift_block(a, rows, m, dsh):
    """Row maxima ``m`` and shifted rows ``dsh`` (K, B) of ``a[rows]``; returns K.

    An `a` of shape (n, 1) holds the class-1 activations of the binary model,
    whose rows are the pairs ``(0, a[r, 0])``: K = 2, without packing pairs.
    """
    if a.shape[1] == 1:
        for b in range(BLOCK):
            x = a[rows[b], 0]
            m[b] = x if x > 0.0 else 0.0
            dsh[0, b] = 0.0 - m[b]
            dsh[1, b] = x - m[b]
        return 2
    k = a.shape[1]
    for b in range(BLOCK):
        m[b] = row_max(a[rows[b]])
    for i in range(k):
        for b in range(BLOCK):
            dsh[i, b] = a[rows[b], i] - m[b]
    return k


@numba.njit(nogil=True, error_model="numpy")
def solve_block(a, rows, t, n, warm, start, m, lam, scratch):
    """Row maxima and shifted normalisers of the rows ``a[rows]``, ``B`` of them.

    For ``t != 1``, an integer power ``n != 0`` and ``K >= 2`` (the caller
    checks): the fixed point (t > 1, K > 2, cold start) and the safeguarded
    Newton of :func:`solve_row` / :func:`solve_row_from` (for K = 2 the
    plain Newton of :func:`solve2`, always cold), run on the ``B`` rows at
    once, each row stopping by its own tests.  `start` holds absolute
    starting normalisers (indexed like `a`) when `warm`.  Writes ``m[:B]``,
    ``lam[:B]`` and leaves the shifted rows in ``scratch[0]`` (K, B).
    An `a` of one column holds binary activations (see :func:`_shift_block`).
    Entries of `rows` may repeat (a short last block is padded with its
    last row): lanes do not interact.
    """
    dsh, f, fp, lo, hi, s, prev, active = scratch
    k = _shift_block(a, rows, m, dsh)
    if k == 2:
        warm = False
    upper = upper_bracket(k, t)
    tm1 = t - 1.0
    for b in range(BLOCK):
        lam[b] = min(max(start[rows[b]] - m[b], 0.0), upper) if warm else 0.0
    if t > 1.0 and k > 2 and not warm:
        for b in range(BLOCK):
            s[b] = 1.0
            prev[b] = np.inf
            active[b] = True
        for _ in range(FIXED_POINT_MAXITER):
            _block_fixed_point_sums(dsh, s, -tm1, n, f)
            left = False
            for b in range(BLOCK):
                if not active[b]:
                    continue
                new = math.expm1(tm1 * math.log(f[b])) / tm1
                step = new - lam[b]
                lam[b] = new
                s[b] = 1.0 + tm1 * new
                target = 4.0 * EPS * new
                rate = step / prev[b]
                if (
                    step <= target
                    or rate >= 1.0
                    or (
                        rate > 0.0 and math.log(target / step) / math.log(rate) > FIXED_POINT_SPARE
                    )
                ):
                    active[b] = False
                else:
                    prev[b] = step
                    left = True
            if not left:
                break
    tol = 4.0 * EPS * (math.sqrt(k) + 1.0)
    for b in range(BLOCK):
        lo[b] = 0.0
        hi[b] = upper
        active[b] = True
    for _ in range(NEWTON_MAXITER):
        _block_sums(dsh, lam, 1.0 - t, n, f, fp)
        left = False
        for b in range(BLOCK):
            if not active[b]:
                continue
            if abs(f[b]) <= tol:
                active[b] = False
                continue
            old = lam[b]
            if k == 2:
                new, lo[b], hi[b] = newton_step_plain(old, f[b], fp[b], lo[b], hi[b])
            else:
                new, lo[b], hi[b] = newton_step(old, f[b], fp[b], t, lo[b], hi[b])
            lam[b] = new
            if abs(new - old) <= 2.0 * EPS * abs(old) or hi[b] - lo[b] <= 4.0 * EPS * hi[b]:
                active[b] = False
            else:
                left = True
        if not left:
            break


@jit()
def normalise_blocked_serial(a, t, p, lam, want_p, start, stop, n_chunks):
    n = integer_power(t)
    scratch = block_scratch(a.shape[1])
    rows = np.empty(BLOCK, dtype=np.int64)
    mb = np.empty(BLOCK)
    lb = np.empty(BLOCK)
    for r in range(start, stop, BLOCK):
        block_rows(rows, r, stop)
        solve_block(a, rows, t, n, False, lam, mb, lb, scratch)
        for b in range(min(BLOCK, stop - r)):
            lam[r + b] = mb[b] + lb[b]
            if want_p:
                fill_probabilities(a[r + b], mb[b], lb[b], t, n, p[r + b])


@jit(parallel=True)
def normalise_blocked_parallel(a, t, p, lam, want_p, start, stop, n_chunks):
    # Chunks rather than rows: each allocates its block scratch once.
    for j in numba.prange(n_chunks):
        lo, hi = chunk_bounds(start, stop, j, n_chunks)
        normalise_blocked_serial(a, t, p, lam, want_p, lo, hi, n_chunks)
