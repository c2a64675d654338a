"""The models by name: one record per model, imported only when first used.

Adding a model is one :class:`ModelRecord` line in ``MODELS``. Whether a
model is binary-only is not recorded here: it is read from the estimator's
own scikit-learn tags (``classifier_tags.multi_class``).
"""

import importlib
from collections.abc import MutableMapping
from dataclasses import dataclass

from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.utils.validation import check_is_fitted


@dataclass(frozen=True)
class ModelRecord:
    """One model by name: its class, its title in reports and its module.

    The module defaults to ``skbayeslogit.<name>``.
    """

    name: str
    class_name: str
    title: str
    module: str = ""

    def __post_init__(self):
        if not self.module:
            object.__setattr__(self, "module", f"skbayeslogit.{self.name}")


#: Every model accepted by name, in the order the names are listed.
MODELS = {
    record.name: record
    for record in (
        ModelRecord("laplace", "LaplaceLogisticClassifier", "Bayesian logistic (Laplace)"),
        ModelRecord("probit", "ProbitClassifier", "Bayesian probit (Laplace)"),
        ModelRecord("tempered", "TemperedLogisticClassifier", "Bi-tempered logistic (robust)"),
        ModelRecord("labelflip", "LabelFlipLogisticClassifier", "Label-flip logistic (Laplace)"),
    )
}


class ModelLocations(MutableMapping):
    """``name -> (module, class name)``: a view of :data:`MODELS`.

    Setting a name adds a record (titled by its name); deleting one removes
    it, so the view and the records never disagree.
    """

    def __getitem__(self, name):
        record = MODELS[name]
        return (record.module, record.class_name)

    def __setitem__(self, name, location):
        module, class_name = location
        MODELS[name] = ModelRecord(name, class_name, name, module)

    def __delitem__(self, name):
        del MODELS[name]

    def __iter__(self):
        return iter(MODELS)

    def __len__(self):
        return len(MODELS)

    def __repr__(self):
        return repr(dict(self))


MODEL_NAMES = ModelLocations()


def model_title(name):
    """The model's title in reports (its name when it is not a known model)."""
    record = MODELS.get(name)
    return name if record is None else record.title


def _import_model_module(record):
    """The record's module, or None when that very module is absent."""
    try:
        return importlib.import_module(record.module)
    except ModuleNotFoundError as exc:
        # Only the model's own module being absent means "not available";
        # a missing dependency inside it is a real error and propagates.
        if exc.name != record.module:
            raise
        return None


def make_model(name, **params):
    """A new, unfitted estimator of this package by name.

    Parameters
    ----------
    name : {"laplace", "probit", "tempered", "labelflip"}
    **params
        Constructor keyword arguments.

    Returns
    -------
    estimator
        Unfitted.

    Raises
    ------
    ValueError
        For an unknown name.
    ImportError
        When the model's module is not part of this installation.
    """
    if not isinstance(name, str) or name not in MODELS:
        raise ValueError(f"unknown model {name!r}; choose one of {', '.join(MODELS)}.")
    record = MODELS[name]
    module = _import_model_module(record)
    if module is None:
        raise ImportError(
            f"model {name!r} ({record.module}.{record.class_name}) is not available in this "
            f"installation of skbayeslogit; available: {', '.join(available_models())}."
        )
    return getattr(module, record.class_name)(**params)


def available_models():
    """Names of the models whose modules import in this installation.

    Returns
    -------
    list of str
    """
    return [name for name, record in MODELS.items() if _import_model_module(record) is not None]


def binary_only(name):
    """Whether the named model fits two classes only, by its scikit-learn tags."""
    return not make_model(name).__sklearn_tags__().classifier_tags.multi_class


def build_estimator(model, params, standardize):
    """Unfitted estimator from a name or an estimator instance (cloned)."""
    if isinstance(model, str):
        est = make_model(model, **params)
    elif isinstance(model, type):
        raise TypeError(
            f"model must be a name or an estimator instance, not the class {model.__name__}; "
            f"use {model.__name__}()."
        )
    elif hasattr(model, "fit") and hasattr(model, "predict_proba"):
        # Never fit the caller's instance in place.
        est = clone(model)
        if params:
            est.set_params(**params)
    else:
        raise TypeError(
            "model must be one of "
            f"{', '.join(map(repr, MODELS))} or a classifier with fit and "
            f"predict_proba; got {model!r}."
        )
    if standardize:
        from ..standardized import StandardizedClassifier

        est = StandardizedClassifier(est)
    return est


def model_label(model):
    """A model's name in result tables: its name, or its (inner) class name."""
    if isinstance(model, str):
        return model
    inner = getattr(model, "estimator", model)
    return type(inner).__name__


def is_fitted(model):
    """Whether ``model`` is a fitted estimator (False for names and non-estimators)."""
    if isinstance(model, str | type):
        return False
    try:
        check_is_fitted(model)
    except (NotFittedError, TypeError):
        # TypeError: not an estimator at all; build_estimator then says what is expected.
        return False
    return True
