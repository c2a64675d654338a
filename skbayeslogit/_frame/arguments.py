"""One-line checks of the accessor's numeric arguments (counts, probabilities, costs)."""

import numbers

import numpy as np


def check_positive_int(name, value, minimum=1):
    """``value`` as an int, or a ValueError naming ``name`` when it is not >= minimum."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or value < minimum:
        raise ValueError(f"{name} must be an integer >= {minimum}; got {value!r}.")
    return int(value)


def check_probability(name, value):
    """``value`` as a float in [0, 1], or a ValueError naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not 0 <= value <= 1:
        raise ValueError(f"{name} must be a number in [0, 1]; got {value!r}.")
    return float(value)


def check_cost(name, value):
    """``value`` as a positive finite float, or a ValueError naming ``name``."""
    if (
        isinstance(value, bool)
        or not isinstance(value, numbers.Real)
        or not (np.isfinite(value) and value > 0)
    ):
        raise ValueError(f"{name} must be a positive finite number; got {value!r}.")
    return float(value)
