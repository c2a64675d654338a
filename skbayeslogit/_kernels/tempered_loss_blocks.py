"""The bi-tempered loss of 16 rows at once, for integer-power temperatures.

The "blocked" family of :mod:`.tempered_loss` (Amid, Warmuth, Anil & Koren,
NeurIPS 2019): the normalisers come from the block solver of
:mod:`.tempered_blocks`.  When also ``(1 - t1) n`` is an integer (n the
integer ``1 / (1 - t2)``), the terms of the classes with label 0 are
rational functions of ``1 + (1 - t2)(d_i - lambda_hat)`` and are vectorised
the same way; the labelled class uses the general formula.  Otherwise each
row's loss is the general row formula.
"""

from __future__ import annotations

import numba
import numpy as np

from .config import jit
from .tempered_blocks import BLOCK, block_rows, block_scratch, solve_block
from .tempered_loss import class_terms, loss_row
from .tempered_math import EPS, chunk_bounds, integer_power, ipow_select


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
    if abs(k) <= 16 and abs(c - k) <= 8.0 * EPS * max(abs(c), 1.0):
        return int(k)
    return 99


@numba.njit(nogil=True, error_model="numpy")
def _block_unlabelled_terms(dsh, lam, labels, t2, n2, c, beta, vv, ww, total, s2, vsum):
    # Class terms of a block's rows for the classes with label y = 0 (all
    # but each row's class `labels[b]`, whose entries are left at 0):
    #   term = p**(2 - t1) / (2 - t1),  v = p**(1 - t1) p / x,  w = p / x,
    # the y <= 0 branch of class_terms with p, p / x and p**(1 - t1) as
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
                w = ipow_select(x, n2 - 1)
                p = w * x
                pa = ipow_select(x, c)
            else:
                keep = i != labels[b]
                y = 1.0 / x
                p = ipow_select(y, -n2)
                w = p * y
                pa = ipow_select(y, -c) if c <= 0 else ipow_select(x, c)
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
def loss_blocked_serial(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # As loss_general_serial, for the integer-power t2 of the dispatch's
    # "blocked" family.  An `a` of shape (n, 1) holds the binary model's
    # class-1 activations (rows (0, a), see tempered_blocks._shift_block);
    # then `g` (n, 1) gets d loss / d a and probability labels `yprob`
    # (n, 1) are P(class 1): the same kernel, without packing pairs.
    binary = a.shape[1] == 1
    k = 2 if binary else a.shape[1]
    n2 = integer_power(t2)
    w = np.empty(k)
    pair = np.zeros(2)
    ypair = np.empty(2)
    gpair = np.empty(2)
    scratch = block_scratch(k)
    rows = np.empty(BLOCK, dtype=np.int64)
    mb = np.empty(BLOCK)
    lb = np.empty(BLOCK)
    c_exp = _rational_terms(t1, t2, n2)
    rational = use_index and ls == 0.0 and c_exp != 99
    if rational:
        labels = np.empty(BLOCK, dtype=np.int64)
        vv = np.empty((k, BLOCK))
        ww = np.empty((k, BLOCK))
        total = np.empty(BLOCK)
        s2 = np.empty(BLOCK)
        vsum = np.empty(BLOCK)
    for r in range(start, stop, BLOCK):
        block_rows(rows, r, stop)
        solve_block(a, rows, t2, n2, warm, lam_io, mb, lb, scratch)
        count = min(BLOCK, stop - r)
        if not rational:
            for b in range(count):
                i = r + b
                c = idx[i] if use_index else 0
                row = a[i]
                yrow = yprob[0] if use_index else yprob[i]
                gi = g[i]
                if binary:
                    pair[1] = row[0]
                    row = pair
                    gi = gpair
                    if not use_index:
                        ypair[0] = 1.0 - yrow[0]
                        ypair[1] = yrow[0]
                        yrow = ypair
                loss[i] = loss_row(row, mb[b], lb[b], t1, t2, ls, c, yrow, use_index, gi, w)
                if binary:
                    g[i, 0] = gpair[1]
                lam_io[i] = mb[b] + lb[b]
            continue
        for b in range(BLOCK):
            labels[b] = idx[rows[b]]
        dsh = scratch[0]
        _block_unlabelled_terms(dsh, lb, labels, t2, n2, c_exp, 2.0 - t1, vv, ww, total, s2, vsum)
        for b in range(count):
            i = r + b
            c = labels[b]
            # The labelled class (y = 1) by the general formula.
            term, v, wc = class_terms(dsh[c, b] - lb[b], 1.0, 0.0, t1, t2)
            vv[c, b] = v
            ww[c, b] = wc
            ratio = (vsum[b] + v) / (s2[b] + wc)
            if binary:
                g[i, 0] = vv[1, b] - ww[1, b] * ratio
            else:
                for j in range(k):
                    g[i, j] = vv[j, b] - ww[j, b] * ratio
            loss[i] = total[b] + term
            lam_io[i] = mb[b] + lb[b]


@jit(parallel=True)
def loss_blocked_parallel(
    a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, start, stop, n_chunks
):
    # Chunks rather than rows so that the scratch arrays are allocated per
    # chunk.
    for j in numba.prange(n_chunks):
        lo, hi = chunk_bounds(start, stop, j, n_chunks)
        loss_blocked_serial(
            a, idx, yprob, use_index, t1, t2, ls, warm, lam_io, loss, g, lo, hi, n_chunks
        )
