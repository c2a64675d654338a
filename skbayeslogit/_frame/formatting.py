"""Numbers as the report shows them: significant digits and exact level labels.

Fixed decimals hide what matters in a report's tables: a per-unit
coefficient of 0.0004 prints as ``0.000`` and a probability of 0.0012 sits
outside its own rounded interval ``[0.000, 0.000]``. Every number is
therefore shown with a number of significant digits, integers as integers,
and a credible level as the exact percentage it is (0.975 is "97.5%").
"""

import math
from numbers import Integral, Real

import numpy as np
import pandas as pd

DIGITS = 3
MISSING = "-"
# Below this magnitude a number is written in exponent form: 0.0001 still
# reads well as a decimal, 0.00001 needs its zeros counted.
_SMALLEST_PLAIN = 1e-4


def level_label(level):
    """The credible level as a percentage without rounding away its digits.

    >>> [level_label(v) for v in (0.8, 0.9, 0.95, 0.975, 0.99, 0.995)]
    ['80%', '90%', '95%', '97.5%', '99%', '99.5%']
    """
    # Nine significant digits drop the binary representation error
    # (0.975 * 100 = 97.49999999999999) and keep any digit a user typed.
    return f"{float(level) * 100:.9g}%"


def significant(value, digits=DIGITS):
    """One number as text with ``digits`` significant digits.

    Integers (and integral floats of a magnitude above the shown digits) are
    written whole; magnitudes below 1e-4 in exponent form; a missing value
    as ``-``.
    """
    if value is None or isinstance(value, str):
        return MISSING if value is None else value
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value))
    if isinstance(value, Integral):
        return str(int(value))
    if not isinstance(value, Real) or math.isnan(value):
        return MISSING
    v = float(value)
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    if v == 0.0:
        return "0"
    size = abs(v)
    if size >= 10 ** (digits - 1):
        return f"{round(v):d}"
    if size < _SMALLEST_PLAIN:
        return f"{v:.{digits - 1}e}"
    return f"{v:.{digits}g}"


def _integral(column):
    values = pd.to_numeric(column, errors="coerce").to_numpy(dtype=float)
    finite = values[np.isfinite(values)]
    return finite.size > 0 and bool(np.all(finite == np.round(finite)))


def format_frame(frame, digits=DIGITS):
    """A copy of ``frame`` with every numeric cell as text (see :func:`significant`).

    A float column whose values are all whole numbers (counts read as float
    because of a missing cell) is written as integers.
    """
    shown = frame.copy()
    for name in shown.columns:
        column = shown[name]
        if pd.api.types.is_bool_dtype(column) or not pd.api.types.is_numeric_dtype(column):
            shown[name] = column.map(lambda v: MISSING if _is_missing(v) else str(v))
            continue
        whole = pd.api.types.is_integer_dtype(column) or _integral(column)
        shown[name] = column.map(
            lambda v, whole=whole: (
                MISSING
                if _is_missing(v)
                else str(int(round(float(v))))
                if whole
                else significant(v, digits)
            )
        )
    return shown


def _is_missing(value):
    try:
        return value is None or bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def frame_text(frame, digits=DIGITS):
    """``frame`` as aligned terminal text with significant digits."""
    return format_frame(frame, digits).to_string()
