"""skbayeslogit: honest probabilities, coefficient intervals and label-noise
robustness for linear classifiers, inside scikit-learn and pandas."""

from .exceptions import CollinearityWarning, SeparationWarning
from .laplace import LaplaceLogisticClassifier

__version__ = "0.1.0"

__all__ = [
    "CollinearityWarning",
    "LaplaceLogisticClassifier",
    "SeparationWarning",
]
