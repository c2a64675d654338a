"""scikit-learn's estimator contract (sklearn.utils.estimator_checks)."""

import importlib

import pytest
from sklearn.utils.estimator_checks import parametrize_with_checks

from skbayeslogit import LaplaceLogisticClassifier


def _optional(module, name, **params):
    try:
        return getattr(importlib.import_module(module), name)(**params)
    except (ImportError, AttributeError):
        return None


ESTIMATORS = [
    LaplaceLogisticClassifier(),
    LaplaceLogisticClassifier(prior_scale=1.0, predictive="mc", n_draws=200, random_state=0),
]
for extra in (
    _optional("skbayeslogit.probit", "ProbitClassifier"),
    _optional("skbayeslogit.tempered", "TemperedLogisticClassifier", t1=0.8, t2=1.2),
    _optional("skbayeslogit.labelflip", "LabelFlipLogisticClassifier"),
    _optional("skbayeslogit.labelflip", "LabelFlipLogisticClassifier", flip_rate=0.1),
):
    if extra is not None:
        ESTIMATORS.append(extra)


@parametrize_with_checks(ESTIMATORS)
def test_sklearn_compatible(estimator, check):
    check(estimator)


def test_contract_covers_every_public_estimator():
    names = {type(e).__name__ for e in ESTIMATORS}
    assert "LaplaceLogisticClassifier" in names
    pytest.importorskip("skbayeslogit.probit")
    assert "ProbitClassifier" in names
    pytest.importorskip("skbayeslogit.labelflip")
    assert "LabelFlipLogisticClassifier" in names
