"""Parameter constraints, declared once per estimator and checked in one place.

An estimator declares a table of its constructor parameters,

    _parameter_constraints = ParameterTable({
        "prior_scale": Scale(allow_auto=True),
        "max_iter": PositiveInt(),
        "predictive": Options("probit", "mc", "map"),
        "random_state": RandomState(),
    })

and ``LinearClassifierBase._check_params`` checks every entry at ``fit``,
returning the converted values (``{"prior_scale": 1.0, ...}``). Every
mistake, of type or of value, raises :class:`~skbayeslogit.exceptions.
InvalidParameterError` (a ValueError and a TypeError) with a one-line
message naming the parameter, what it must be and what it got.

The tempered model declares its table the same way: its temperatures are
``Interval(0.0, 1.0, why="...")`` and ``Interval(1.0, 5.0, why="...")``,
``label_smoothing`` is ``Interval(0.0, 1.0, closed="left")``, ``start`` is
``Options("convex", "zero", listing="or")``, ``warm_start`` is
``Boolean()``; its ``_check_params`` then reads the converted values from
``super()._check_params()``.
"""

import numbers

import numpy as np
from sklearn.utils import check_random_state

from ..exceptions import InvalidParameterError


def _is_real(value):
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


class Constraint:
    """One parameter's constraint: ``check(name, value)`` returns the converted value."""

    def check(self, name, value):  # pragma: no cover - abstract
        raise NotImplementedError

    @staticmethod
    def fail(message):
        raise InvalidParameterError(message)


#: The usable prior scales: the prior precision 1 / s^2 and the evidence's
#: log terms stay far inside float64 (1e-100 .. 1e100) and beside a Hessian
#: of any size the magnitude check lets through; outside, 1 / s^2 overflows
#: or underflows (1e-160 made the Hessian infinite, 1e300 overflowed).
SCALE_RANGE = (1e-50, 1e50)


class Scale(Constraint):
    """A prior scale: a float in ``SCALE_RANGE``, None, or (``allow_auto``) "auto"."""

    def __init__(self, allow_auto=False):
        self.allow_auto = allow_auto

    def check(self, name, value):
        if value is None:
            return None
        if isinstance(value, str):
            if self.allow_auto and value == "auto":
                return "auto"
            options = (
                'a positive float, None or "auto"'
                if self.allow_auto
                else "a positive float or None"
            )
            self.fail(f"{name} must be {options}; got {value!r}.")
        if not _is_real(value):
            self.fail(f"{name} must be a positive float; got {type(value).__name__}.")
        value = float(value)
        if not (np.isfinite(value) and value > 0):
            self.fail(f"{name} must be a positive finite float; got {value!r}.")
        low, high = SCALE_RANGE
        if not low <= value <= high:
            self.fail(
                f"{name} must be in [{low:g}, {high:g}] (or None for a flat prior); got {value!r}."
            )
        return value


class PositiveInt(Constraint):
    """An integer >= ``minimum`` (1 by default; not a bool, not a float holding an integer)."""

    def __init__(self, minimum=1, why=None):
        self.minimum, self.why = minimum, why

    def check(self, name, value):
        if (
            isinstance(value, bool)
            or not isinstance(value, numbers.Integral)
            or value < self.minimum
        ):
            wanted = "a positive integer" if self.minimum == 1 else f"an integer >= {self.minimum}"
            why = f" ({self.why})" if self.why else ""
            self.fail(f"{name} must be {wanted}{why}; got {value!r}.")
        return int(value)


class PositiveFloat(Constraint):
    """A real number > 0 and (``maximum``) at most ``maximum``."""

    def __init__(self, maximum=None, why=None):
        self.maximum, self.why = maximum, why

    def check(self, name, value):
        if not _is_real(value) or not value > 0:
            self.fail(f"{name} must be a positive float; got {value!r}.")
        if self.maximum is not None and not value <= self.maximum:
            why = f" ({self.why})" if self.why else ""
            self.fail(f"{name} must be in (0, {self.maximum:g}]{why}; got {value!r}.")
        return float(value)


class NonNegativeFloat(Constraint):
    """A finite real number >= 0, or (``allow_auto``) "auto"."""

    def __init__(self, allow_auto=False):
        self.allow_auto = allow_auto

    def check(self, name, value):
        wanted = "a float or 'auto'" if self.allow_auto else "a float"
        if isinstance(value, str):
            if self.allow_auto and value == "auto":
                return "auto"
            self.fail(f"{name} must be {wanted}; got {value!r}.")
        if not _is_real(value):
            self.fail(f"{name} must be {wanted}; got {type(value).__name__}.")
        value = float(value)
        if not (np.isfinite(value) and value >= 0):
            self.fail(f"{name} must be a finite float >= 0; got {value!r}.")
        return value


class Boolean(Constraint):
    """True or False (numpy's bool too)."""

    def check(self, name, value):
        # A string such as "no" is truthy: accepting it would silently fit the
        # opposite of what was meant.
        if not isinstance(value, bool | np.bool_):
            self.fail(f"{name} must be True or False; got {value!r}.")
        return bool(value)


class Options(Constraint):
    """One of a few values; ``listing="or"`` words a pair as "'a' or 'b'"."""

    def __init__(self, *options, listing="one of"):
        self.options, self.listing = options, listing

    def check(self, name, value):
        if isinstance(value, str | None | bool | np.bool_ | numbers.Number):
            # 1 == True: a number matches a boolean option only when it is a bool.
            is_flag = isinstance(value, bool | np.bool_)
            for option in self.options:
                if value == option and is_flag == isinstance(option, bool):
                    return option
        if self.listing == "or":
            wanted = " or ".join(map(repr, self.options))
        else:
            wanted = f"one of {', '.join(map(repr, self.options))}"
        self.fail(f"{name} must be {wanted}; got {value!r}.")


class Interval(Constraint):
    """A finite real number in [low, high] (``closed="left"``: [low, high))."""

    def __init__(self, low, high, closed="both", why=None):
        self.low, self.high, self.closed, self.why = low, high, closed, why

    def check(self, name, value):
        if not _is_real(value):
            self.fail(f"{name} must be a float; got {type(value).__name__}.")
        value = float(value)
        upper_ok = value <= self.high if self.closed == "both" else value < self.high
        if not (np.isfinite(value) and self.low <= value and upper_ok):
            bracket = "]" if self.closed == "both" else ")"
            why = f" ({self.why})" if self.why else ""
            self.fail(
                f"{name} must be in [{self.low:g}, {self.high:g}{bracket}{why}; got {value!r}."
            )
        return value


class Probability(Constraint):
    """A real number strictly between 0 and 1 (a credible level)."""

    def check(self, name, value):
        if not _is_real(value) or not 0 < value < 1:
            self.fail(f"{name} must be a probability strictly between 0 and 1; got {value!r}.")
        return float(value)


class HasMethods(Constraint):
    """An object with the named methods (an estimator to wrap, say)."""

    def __init__(self, *methods, what="a scikit-learn style classifier"):
        self.methods, self.what = methods, what

    def check(self, name, value):
        if not all(callable(getattr(value, m, None)) for m in self.methods):
            self.fail(f"{name} must be {self.what}; got {value!r}.")
        return value


class RandomState(Constraint):
    """None, an int seed, a numpy RandomState or a numpy Generator (see :func:`as_generator`)."""

    def check(self, name, value):
        if value is None or isinstance(value, np.random.RandomState | np.random.Generator):
            return value
        if isinstance(value, numbers.Integral) and not isinstance(value, bool):
            if 0 <= value < 2**32:
                return value
        self.fail(
            f"{name} must be None, an integer seed in [0, 2**32), a numpy RandomState or "
            f"a numpy Generator; got {value!r}."
        )


def as_generator(random_state):
    """The numpy Generator of a ``random_state`` (the package's one convention).

    A Generator is used as it is; None, an int or a RandomState seed a new
    Generator from scikit-learn's ``check_random_state`` (so an int gives the
    same draws every time).
    """
    if isinstance(random_state, np.random.Generator):
        return random_state
    try:
        rng = check_random_state(random_state)
    except ValueError as exc:
        raise InvalidParameterError(str(exc)) from None
    return np.random.default_rng(rng.randint(0, 2**31 - 1))


class ParameterTable:
    """The constraints of an estimator's parameters, checked in declaration order.

    Parameters
    ----------
    constraints : dict of str to Constraint
    """

    def __init__(self, constraints):
        self.constraints = dict(constraints)

    def check(self, estimator):
        """Every declared parameter of ``estimator`` checked; the converted values."""
        return self.check_values({name: getattr(estimator, name) for name in self.constraints})

    def check_values(self, values):
        """The entries of ``values`` (a method's arguments, say) checked; the converted values."""
        return {name: rule.check(name, values[name]) for name, rule in self.constraints.items()}

    def __or__(self, other):
        """This table with ``other``'s entries added or replacing."""
        return ParameterTable({**self.constraints, **other.constraints})
