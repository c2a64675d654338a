"""Warnings and errors that this package emits."""


class SeparationWarning(UserWarning):
    """The maximum-likelihood estimate does not exist (separated classes)."""


class CollinearityWarning(UserWarning):
    """Features are nearly linearly dependent; spreads are inflated."""


class InvalidParameterError(ValueError, TypeError):
    """A parameter outside its declared constraints (wrong type or value).

    A subclass of both ValueError and TypeError, so that either ``except``
    clause catches it, whatever the kind of mistake.
    """
