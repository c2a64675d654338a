"""Cross-validated comparison of several models on the same stratified folds."""

import time
import warnings
from collections.abc import Mapping

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.model_selection import StratifiedKFold

from .columns import resolve_features
from .evaluation import scores
from .fitting import class_codes, record
from .model import FrameModel, labels_of
from .orientation import positive_index
from .registry import MODELS, binary_only, build_estimator, model_label
from .rows import missing_policy, rows_used

_SCORES = ("accuracy", "log_loss", "brier", "ece")


def _check_folds(y, cv):
    counts = pd.Series(y).value_counts()
    if counts.min() < cv:
        small = ", ".join(f"{v!r} ({c})" for v, c in counts.items() if c < cv)
        raise ValueError(
            f"cv={cv} stratified folds need at least {cv} rows of every class; too few: "
            f"{small}. Use fewer folds."
        )


def _entries(models):
    """``(label, model)`` pairs from one model, a sequence or a mapping."""
    if isinstance(models, str) or hasattr(models, "fit"):
        models = [models]  # one model, not a sequence of characters
    entries = (
        list(models.items())
        if isinstance(models, Mapping)
        else [(model_label(m), m) for m in models]
    )
    labels = [lab for lab, _ in entries]
    if len(set(labels)) != len(labels):
        raise ValueError(f"models have repeated labels {labels}; pass a mapping label -> model.")
    return entries


def _skip_reason(model, available, n_classes):
    if not isinstance(model, str) or model not in MODELS:
        return None
    if model not in available:
        return f"model {model!r} is not available in this installation; skipped."
    if n_classes > 2 and binary_only(model):
        return f"model {model!r} is binary-only; skipped for {n_classes} classes."
    return None


def runnable_models(models, available, n_classes, standardize, stacklevel=2):
    """Unfitted estimators by label, leaving out (with a warning) those that cannot run.

    ``standardize`` wraps each in a StandardizedClassifier.
    """
    runnable = []
    for label, m in _entries(models):
        reason = _skip_reason(m, available, n_classes)
        if reason is not None:
            warnings.warn(reason, UserWarning, stacklevel=stacklevel)
            continue
        runnable.append((label, build_estimator(m, {}, standardize)))
    if not runnable:
        raise ValueError("none of the models can be run on this target.")
    return runnable


def _fold_scores(est, df, y, folds, target, held_out=None):
    """Held-out scores of ``est`` (a FrameModel: each fold encodes its own training rows).

    ``held_out``, an (n, K) array, receives each row's probabilities from
    the fold that held it out.
    """
    # One untimed fit first: the first fit of a model in a process pays
    # one-off numba compilation, which is not the model's speed.
    clone(est).fit(df.iloc[folds[0][0]])
    per_fold = []
    for train, test in folds:
        fold_model = clone(est)
        start = time.perf_counter()
        fold_model.fit(df.iloc[train])
        fit_time = time.perf_counter() - start
        P = np.asarray(fold_model.predict_proba(df.iloc[test]))
        if held_out is not None:
            held_out[test] = P
        _, codes = class_codes(fold_model, y[test], target)
        s = scores(P, codes, bins=10, positive=positive_index(fold_model, P.shape[1]))
        s["accuracy"] = float(np.mean(np.argmax(P, axis=1) == codes))
        s["fit_time"] = fit_time
        per_fold.append(s)
    fold_table = pd.DataFrame(per_fold)
    row = {name: float(fold_table[name].mean()) for name in _SCORES}
    row.update({f"{name}_sd": float(fold_table[name].std(ddof=1)) for name in _SCORES})
    row["fit_time"] = float(fold_table["fit_time"].mean())
    return row


def compare_models(df, target, models, cv, *, available, random_state, standardize,
                   options, held_out=None):  # fmt: skip
    """One row of held-out scores per model (see the accessor's ``compare``).

    ``available`` lists the model names this installation can import;
    ``options`` holds the FrameModel keywords (features, positive, ...,
    missing, and ``dropna``). The column roles are decided once, on the
    whole frame, and every fold fits those same feature columns.
    Warnings point at the caller of the accessor method that calls this.
    ``held_out``, a dict, receives for each model label its out-of-fold
    probabilities: an (n_used, K) array in ``classes_`` order, one row per
    row used, in frame order.
    """
    options = dict(options)
    options["missing"] = missing_policy(options.get("missing"), options.pop("dropna", False))
    if options.get("features") is not None:
        options["features"] = resolve_features(df, target, options["features"])
    decided = FrameModel(None, target, **options).decide_roles(df)
    options.update(features=decided.features, id=decided.ids or None, exclude=None)
    options["positive"] = decided.positive
    keep = rows_used(df, decided.features, target, options["missing"], stacklevel=4)
    used = df if keep.all() else df.loc[keep]
    y = labels_of(used[target])
    _check_folds(y, cv)
    n_classes = len(pd.unique(y))
    runnable = runnable_models(models, available, n_classes, False, stacklevel=4)
    folds = list(StratifiedKFold(cv, shuffle=True, random_state=random_state).split(used, y))
    rows = {}
    for label, est in runnable:
        frame_model = FrameModel(est, target, standardize=standardize, **options)
        probs = None
        if held_out is not None:
            probs = held_out[label] = np.zeros((len(used), n_classes))
        rows[label] = _fold_scores(frame_model, used, y, folds, target, probs)
    out = pd.DataFrame.from_dict(rows, orient="index")
    out.index.name = "model"
    return record(out, keep, cv=cv, random_state=random_state, standardize=standardize)
