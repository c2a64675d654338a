"""A fitted model and the rows it sees: fit one on a frame, or use a fitted one.

A model given by name or as an unfitted estimator is fitted on the frame as
a :class:`~skbayeslogit._frame.model.FrameModel` (column roles decided once,
categorical columns encoded); a fitted one is used as is: a FrameModel on
its own feature columns, any other estimator on ``feature_names_in_``.
"""

import copy

import numpy as np
import pandas as pd

from .columns import model_data, require_columns, resolve_features
from .model import FrameModel
from .posterior_view import coefficient_table, labels_of

__all__ = ["coefficient_table", "evidence_of_columns", "fit_on_frame", "fitted_on_frame"]
from .registry import build_estimator, is_fitted
from .rows import missing_policy, rows_used


def fit_on_frame(df, target, model, options, params):
    """Fit ``model`` (a name or an estimator, cloned) to columns of ``df``.

    Parameters
    ----------
    df : pandas.DataFrame
    target : str
    model : name or estimator
    options : dict
        FrameModel keywords: features, positive, weight, id, exclude,
        missing, max_levels, standardize; and ``dropna`` (True means
        ``missing="drop"``).
    params : dict
        Constructor parameters of the estimator.

    Returns
    -------
    FrameModel
        Fitted.
    """
    options = dict(options)
    options["missing"] = missing_policy(options.get("missing"), options.pop("dropna", False))
    features = options.get("features")
    if features is not None:
        options["features"] = resolve_features(df, target, features)
    require_columns(df, [target, *(options.get("features") or [])])
    est = build_estimator(model, params, standardize=False)
    frame_model = FrameModel(est, target, **options)
    return frame_model.fit(df)


def evidence_of_columns(model, df=None):
    """A fitted model's column evidence (refitted on ``df`` when given), or a TypeError."""
    if not hasattr(model, "column_evidence"):
        raise TypeError(
            f"{type(model).__name__} gives no column evidence; use a model from "
            "df.bayeslogit.fit with a Gaussian posterior (laplace, probit)."
        )
    if isinstance(model, FrameModel):
        return model.column_evidence(df)
    return model.column_evidence()


def fitted_on_frame(df, model, target, dropna, features=None, stacklevel=2, positive=None):
    """A fitted model and the data it sees: use a fitted one, fit anything else.

    Returns
    -------
    model, X, y, keep
        ``X`` holds the rows used (a FrameModel encodes them itself);
        ``keep`` marks the rows of ``df`` used.
    """
    if model is None:
        raise TypeError("model is required.")
    if is_fitted(model):
        if not hasattr(model, "predict_proba"):
            raise TypeError(f"model must have predict_proba; got {type(model).__name__}.")
        return (model, *model_rows(df, model, target, dropna, stacklevel=stacklevel + 1))
    options = {"features": features, "positive": positive, "dropna": dropna}
    est = fit_on_frame(df, target, model, options, {})
    return (est, *model_rows(df, est, target, dropna, warn=False))


def model_rows(df, model, target, dropna, warn=True, stacklevel=2):
    """The rows of ``df`` a fitted model scores, its input there, and the labels.

    Returns
    -------
    X, y, keep
        ``y`` is None when ``target`` is None.
    """
    if not isinstance(model, FrameModel):
        return model_data(df, model, target, dropna, warn, stacklevel + 1)
    feats = list(model.feature_names_in_)
    require_columns(df, feats + ([] if target is None else [target]))
    policy = "drop" if dropna else model.missing
    keep = rows_used(df, feats, target, policy, warn=warn, stacklevel=stacklevel + 1)
    used = df if keep.all() else df.loc[keep]
    y = None if target is None else labels_of(used[target])
    return used, y, keep


def class_codes(model, y, target):
    """The model's classes and the index of each label among them."""
    classes = np.asarray(model.classes_)
    codes = pd.Index(classes).get_indexer(y)
    if np.any(codes < 0):
        unknown = pd.unique(y[codes < 0])
        raise ValueError(
            f"the target {target!r} has label(s) the model was not fitted on: "
            f"{', '.join(map(repr, unknown[:10]))}; the model's classes are "
            f"{', '.join(map(repr, classes))}."
        )
    return classes, codes


def rows_with(df, keep, order=None, **columns):
    """The used rows of ``df`` (in ``order``) plus new columns, with a private copy of attrs."""
    out = df if keep.all() else df.loc[keep]
    if order is not None:
        out = out.iloc[order]
    out = out.assign(**columns)
    # Our own copy of the caller's attrs: updating it must not reach theirs.
    out.attrs = copy.deepcopy(df.attrs)
    return out


def record(result, keep, **attrs):
    """Store ``attrs`` and the number of rows left out in ``result.attrs``."""
    result.attrs.update(attrs)
    result.attrs["rows_dropped"] = int((~keep).sum())
    return result
