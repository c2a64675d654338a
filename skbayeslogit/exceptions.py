"""Warnings that this package emits."""


class SeparationWarning(UserWarning):
    """The maximum-likelihood estimate does not exist (separated classes)."""


class CollinearityWarning(UserWarning):
    """Features are nearly linearly dependent; spreads are inflated."""
