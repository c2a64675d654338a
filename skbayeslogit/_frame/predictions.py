"""A model's predictions on the rows of a frame: probabilities and doubtful labels."""

import warnings

import numpy as np
import pandas as pd

from .errors import UnseenLevelWarning
from .fitting import class_codes, fitted_on_frame, model_rows, record, rows_with
from .orientation import positive_index, probability_columns
from .registry import is_fitted, model_label

# Warnings point at the user's call: this module -> accessor method -> user.
_CALLER = 3


def prediction_table(df, model, level, dropna):
    """The frame's used rows plus probabilities, bounds and label (see ``predict_table``)."""
    if not is_fitted(model):
        raise TypeError(
            "predict_table needs a fitted model; fit one first with df.bayeslogit.fit."
        )
    X, _, keep = model_rows(df, model, None, dropna, stacklevel=_CALLER + 1)
    classes = np.asarray(model.classes_)
    if hasattr(model, "probability_table"):
        found = model.probability_table(X, level=level)
        new = {c: found[c].to_numpy() for c in found.columns}
        extra = {"unseen_levels": found.attrs["unseen_levels"]}
        if extra["unseen_levels"]:
            counts = ", ".join(f"{c}: {k}" for c, k in extra["unseen_levels"].items())
            warnings.warn(
                f"levels not seen in fitting, scored as no level of their column ({counts}).",
                UnseenLevelWarning,
                stacklevel=_CALLER,
            )
    else:
        P = np.asarray(model.predict_proba(X))
        bounds = None
        if hasattr(model, "predict_interval"):
            bounds = model.predict_interval(X, level=level)
        new = probability_columns(P, bounds, classes, positive_index(model, len(classes)))
        extra = {}
    clash = [c for c in new if c in df.columns]
    if clash:
        raise ValueError(
            f"the frame already has column(s) {', '.join(clash)}; drop or rename them "
            "before predict_table adds its own."
        )
    return record(rows_with(df, keep, **new), keep, level=level, **extra)


def default_doubt_model(available):
    """The robust "tempered" model, or "laplace" with a warning when it is absent."""
    if "tempered" in available:
        return "tempered"
    warnings.warn(
        "the tempered model is not available in this installation; scoring "
        "doubtful labels with the Laplace model by -log P(recorded label), "
        "which is less robust to the very label errors it looks for.",
        UserWarning,
        stacklevel=_CALLER,
    )
    return "laplace"


def doubtful_rows(df, target, model, top, features, dropna, positive=None):
    """The rows ranked by doubt about their recorded label (see ``doubtful_labels``)."""
    model, X, y, keep = fitted_on_frame(
        df, model, target, dropna, features=features, stacklevel=_CALLER + 1, positive=positive
    )
    classes, codes = class_codes(model, y, target)
    P = np.asarray(model.predict_proba(X))
    p_rec = P[np.arange(len(codes)), codes]
    if hasattr(model, "label_doubt"):
        score = np.asarray(model.label_doubt(X, y), dtype=np.float64)
        scorer = "label_doubt"
    else:
        score = -np.log(np.clip(p_rec, np.finfo(np.float64).tiny, 1.0))
        scorer = "-log P(recorded label)"
    order = np.argsort(-score, kind="stable")
    if top is not None:
        order = order[:top]
    out = rows_with(
        df,
        keep,
        order,
        doubt_score=score[order],
        prob_recorded_label=p_rec[order],
        most_likely_label=classes[np.argmax(P[order], axis=1)],
    )
    ids = list(getattr(model, "id_columns_", []))
    return record(out, keep, scorer=scorer, model=model_label(model), id_columns=ids)


# An equal-tailed interval at a vanishing level closes on the median: the mean
# of its bounds is the posterior median of the probability to within about
# this level times the spread of its distribution.
MEDIAN_LEVEL = 1e-9


def every_row_table(rows, model, level, *, target, ids, lines, held_out=None):
    """Every used row's probabilities: mean, median, credible bounds and out-of-fold.

    Parameters
    ----------
    rows : pandas.DataFrame
        The rows the model was fitted on.
    model : fitted FrameModel
    level : float in (0, 1)
    target : str
    ids : list of str
    lines : array-like of shape (n,), int
    held_out : ndarray of shape (n, K), optional
        Out-of-fold probabilities from the cross-validation, in
        ``classes_`` order.

    Returns
    -------
    pandas.DataFrame
        Indexed as ``rows``: the ID columns, ``line``, the target, then for
        the positive class (binary) or every class (multiclass)
        ``prob_<c>`` (the posterior predictive mean), ``prob_<c>_median``,
        ``prob_<c>_lower``, ``prob_<c>_upper`` (equal-tailed posterior
        quantiles at ``level``; median and bounds only for a model with a
        posterior), ``oof_prob_<c>``, and ``predicted_label``.
    """
    classes = np.asarray(model.classes_)
    P = np.asarray(model.predict_proba(rows))
    index = positive_index(model, len(classes))
    shown = [index] if index is not None else list(range(len(classes)))
    out = pd.DataFrame({c: rows[c].to_numpy() for c in ids}, index=rows.index)
    out["line"] = np.asarray(lines)
    out[target] = rows[target].to_numpy()
    bounds = median = None
    if hasattr(model, "predict_interval"):
        bounds = model.predict_interval(rows, level=level)
        near = model.predict_interval(rows, level=MEDIAN_LEVEL)
        median = (np.asarray(near[0]) + np.asarray(near[1])) / 2.0
    for k in shown:
        name = f"prob_{classes[k]}"
        out[name] = P[:, k]
        if bounds is not None:
            out[f"{name}_median"] = _column(median, k)
            out[f"{name}_lower"] = _column(bounds[0], k)
            out[f"{name}_upper"] = _column(bounds[1], k)
    if held_out is not None:
        for k in shown:
            out[f"oof_prob_{classes[k]}"] = held_out[:, k]
    out["predicted_label"] = classes[np.argmax(P, axis=1)]
    out.attrs["level"] = level
    return out


def _column(values, k):
    values = np.asarray(values)
    return values if values.ndim == 1 else values[:, k]
