"""Errors and warnings about the input table (one line each, naming the column)."""


class FrameInputError(ValueError):
    """The table cannot be used as given; the message names the column and the problem."""


class LabelVariantWarning(UserWarning):
    """Target labels differ only by letter case or surrounding spaces."""


class UnseenLevelWarning(UserWarning):
    """Rows to score hold categorical levels the model was not fitted on (encoded as none)."""
