"""The tempered kernels' constants and temperature test, without numba.

Shared by the numba kernels (:mod:`.tempered_math`, :mod:`.tempered_rows`)
and their numpy path (:mod:`.tempered_numpy`), which must not import numba:
the package imports numba only when a kernel is first compiled.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "EPS",
    "HUGE",
    "NEWTON_MAXITER",
    "FIXED_POINT_MAXITER",
    "FIXED_POINT_SPARE",
    "integer_power",
]

EPS = float(np.finfo(np.float64).eps)
HUGE = float(np.finfo(np.float64).max)

# Iteration limits of the normaliser's solvers.
NEWTON_MAXITER = 200
FIXED_POINT_MAXITER = 50
# The fixed point hands over to Newton once its rate predicts more than this
# many further steps.
FIXED_POINT_SPARE = 3.0


def integer_power(t):
    """n when ``1 / (1 - t)`` is the integer n (to rounding), ``1 <= |n| <= 16``; else 0.

    Then exp_t is a polynomial (t < 1) or reciprocal polynomial (t > 1) and
    repeated multiplication replaces log1p + exp, with a relative error of
    at most |n| eps / 2 (the rounding of 1 + z, amplified n times).
    """
    if t == 1.0:
        return 0
    r = 1.0 / (1.0 - t)
    n = round(r)
    if n != 0 and abs(n) <= 16 and abs(r - n) <= 8.0 * EPS * abs(r):
        return int(n)
    return 0
