"""skbayeslogit: honest probabilities, coefficient intervals and label-noise
robustness for linear classifiers, inside scikit-learn and pandas."""

from . import accessor  # noqa: F401  (registers the df.bayeslogit accessor)
from ._linear.sources import set_block_rows
from .exceptions import CollinearityWarning, SeparationWarning
from .labelflip import LabelFlipLogisticClassifier
from .laplace import LaplaceLogisticClassifier
from .probit import ProbitClassifier
from .tempered import TemperedLogisticClassifier
from .tempered_functions import bitempered_loss, exp_t, log_t, tempered_softmax

__version__ = "0.1.0"

__all__ = [
    "CollinearityWarning",
    "LabelFlipLogisticClassifier",
    "LaplaceLogisticClassifier",
    "ProbitClassifier",
    "SeparationWarning",
    "TemperedLogisticClassifier",
    "bitempered_loss",
    "exp_t",
    "log_t",
    "set_block_rows",
    "tempered_softmax",
]
