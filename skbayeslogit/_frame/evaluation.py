"""How good a model's probabilities are on a frame: scores, confusion, calibration, costs.

Every table function takes the frame, the target column and a model (a
fitted one, or a name or unfitted estimator that is fitted on the frame
first) and returns a DataFrame whose ``attrs`` hold the summary numbers and
``rows_dropped``.
"""

import numpy as np
import pandas as pd

from .fitting import class_codes, fitted_on_frame, record
from .orientation import positive_index

# Warnings point at the user's call: table function -> accessor method -> user.
_CALLER = 3


def quantile_edges(prob, bins, weights=None):
    """Edges of equal-count bins: weighted quantiles of the probabilities.

    The quantile is the inverted empirical distribution function (numpy's
    ``method="inverted_cdf"``, with ``weights`` as frequency weights), so an
    integer weight equals repeating the row. Repeated edges (many equal
    probabilities) are merged, so there may be fewer than ``bins`` bins.
    """
    order = np.argsort(prob, kind="stable")
    sorted_p = prob[order]
    w = np.ones(len(prob)) if weights is None else np.asarray(weights, dtype=float)[order]
    cum = np.cumsum(w)
    # k * total / bins, not (k / bins) * total: exact for integer totals.
    targets = np.arange(bins + 1) * cum[-1] / bins
    at = np.minimum(np.searchsorted(cum, targets, side="left"), len(prob) - 1)
    edges = sorted_p[at]
    edges[0] = sorted_p[np.argmax(w > 0)]
    return np.unique(edges)


def reliability(prob, hit, bins, binning="uniform", weights=None):
    """Reliability of one probability column in equal-width or equal-count bins.

    Equal-width bins are ``[0, 1/bins], (1/bins, 2/bins], ...`` (the same
    rule as scikit-learn's ``calibration_curve`` with ``strategy="uniform"``);
    equal-count bins have the edges of :func:`quantile_edges`, each bin
    again closed on the right.

    Parameters
    ----------
    prob : ndarray of shape (n,), in [0, 1]
    hit : ndarray of shape (n,), bool (the event happened)
    bins : int
    binning : {"uniform", "quantile"}
    weights : ndarray of shape (n,), optional
        Frequency weights (>= 0): a row of weight 3 counts as three rows in
        the means, the ECE and the edges of equal-count bins.

    Returns
    -------
    table : dict of ndarray of shape (number of bins,)
        ``count`` is the number of rows in a bin; with weights, ``weight``
        is their weight sum and the means are weighted.
    ece : float
        sum over bins of weight / total weight * |observed - mean predicted|.
    """
    if binning == "quantile":
        edges = quantile_edges(prob, bins, weights)
    else:
        edges = np.linspace(0.0, 1.0, bins + 1)
    n_bins = len(edges) - 1
    ids = np.searchsorted(edges[1:-1], prob)
    w = np.ones(len(prob)) if weights is None else np.asarray(weights, dtype=float)
    count = np.bincount(ids, minlength=n_bins)
    size = np.bincount(ids, weights=w, minlength=n_bins)
    sum_p = np.bincount(ids, weights=w * prob, minlength=n_bins)
    sum_y = np.bincount(ids, weights=w * hit, minlength=n_bins)
    full = size > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        mean_p = np.where(full, sum_p / size, np.nan)
        obs = np.where(full, sum_y / size, np.nan)
    ece = float(np.sum(size[full] * np.abs(obs[full] - mean_p[full])) / np.sum(size))
    table = {
        "bin": np.arange(n_bins),
        "bin_lower": edges[:-1],
        "bin_upper": edges[1:],
        "count": count.astype(np.int64),
        **({} if weights is None else {"weight": size}),
        "mean_predicted": mean_p,
        "observed_frequency": obs,
    }
    return table, ece


def scores(P, codes, bins=10, positive=1):
    """Log loss, Brier score and ECE of probabilities P for class codes.

    Binary (two columns): Brier and ECE on the probability of the class
    ``positive`` (an index, default the second). Multiclass: Brier summed
    over classes (range [0, 2]) and the class-wise ECE (mean of the
    one-vs-rest ECEs).
    """
    n, K = P.shape
    rows = np.arange(n)
    eps = np.finfo(np.float64).eps
    log_loss = float(-np.mean(np.log(np.clip(P[rows, codes], eps, 1.0))))
    if K == 2:
        hit = codes == positive
        brier = float(np.mean((hit - P[:, positive]) ** 2))
        _, ece = reliability(P[:, positive], hit, bins)
        return {"log_loss": log_loss, "brier": brier, "ece": ece}
    onehot = np.zeros_like(P)
    onehot[rows, codes] = 1.0
    brier = float(np.mean(np.sum((onehot - P) ** 2, axis=1)))
    eces = [reliability(P[:, k], codes == k, bins)[1] for k in range(K)]
    return {"log_loss": log_loss, "brier": brier, "ece": float(np.mean(eces))}


def call_counts(truth, called):
    """True/false positives and negatives of boolean calls against the truth."""
    return {
        "tp": int(np.sum(truth & called)),
        "fp": int(np.sum(~truth & called)),
        "fn": int(np.sum(truth & ~called)),
        "tn": int(np.sum(~truth & ~called)),
    }


def rates(table):
    """Sensitivity, specificity, precision and accuracy of a table of counts.

    A rate with an empty denominator is NaN.
    """
    tp, fp, fn, tn = (np.asarray(table[k], dtype=float) for k in ("tp", "fp", "fn", "tn"))
    with np.errstate(divide="ignore", invalid="ignore"):
        return {
            "sensitivity": np.where(tp + fn > 0, tp / (tp + fn), np.nan),
            "specificity": np.where(tn + fp > 0, tn / (tn + fp), np.nan),
            "precision": np.where(tp + fp > 0, tp / (tp + fp), np.nan),
            "accuracy": (tp + tn) / (tp + fp + fn + tn),
        }


def _probabilities(df, target, model, dropna, positive):
    model, X, y, keep = fitted_on_frame(
        df, model, target, dropna, stacklevel=_CALLER + 2, positive=positive
    )
    classes, codes = class_codes(model, y, target)
    index = positive_index(model, len(classes), positive)
    return np.asarray(model.predict_proba(X)), classes, codes, keep, index


def confusion_table(df, target, model, threshold, dropna, positive=None):
    """Counts and rates of the calls ``P(c | x) >= threshold`` (see the accessor)."""
    P, classes, codes, keep, index = _probabilities(df, target, model, dropna, positive)
    shown = [index] if len(classes) == 2 else range(len(classes))
    rows = [
        {"threshold": threshold, "n": len(codes), **call_counts(codes == k, P[:, k] >= threshold)}
        for k in shown
    ]
    out = pd.DataFrame(rows, index=pd.Index([classes[k] for k in shown], name="class"))
    for name, values in rates(out).items():
        out[name] = values
    extra = {}
    if len(classes) > 2:
        extra["accuracy"] = float(np.mean(np.argmax(P, axis=1) == codes))
    return record(out, keep, **extra)


BINNINGS = ("uniform", "quantile")


def calibration_table(df, target, model, bins, dropna, positive=None, binning="uniform"):
    """Reliability table with ECE, Brier score and log loss in attrs (see the accessor).

    ``binning`` is "uniform", "quantile" or "both" (the two tables one
    below the other); the ``binning`` column records which each row is.
    A model fitted with a weight column (``weight=``) counts every row by
    its weight: the bins' means, the ECE, the Brier score and the log loss.
    ``attrs["ece"]`` is the first binning's ECE, ``attrs["ece_by_binning"]``
    each one's.
    """
    chosen = BINNINGS if binning == "both" else (binning,)
    if not set(chosen) <= set(BINNINGS):
        raise ValueError(f"binning must be 'uniform', 'quantile' or 'both'; got {binning!r}.")
    P, classes, codes, keep, index = _probabilities(df, target, model, dropna, positive)
    weights = _row_weights(df, model, keep)
    binary = len(classes) == 2
    shown = [index] if binary else range(len(classes))
    parts, ece, class_ece = [], {}, []
    for how in chosen:
        by_class = {}
        for k in shown:
            table, by_class[classes[k]] = reliability(P[:, k], codes == k, bins, how, weights)
            part = pd.DataFrame(table)
            if not binary:
                part.insert(0, "class", classes[k])
            part.insert(0, "binning", how)
            parts.append(part)
        ece[how] = float(np.mean(list(by_class.values())))
        class_ece.append(by_class)
    out = pd.concat(parts, ignore_index=True)
    summary = _weighted_scores(P, codes, index if binary else None, weights)
    # The class-wise ECEs of the first binning, as attrs["ece"] is.
    extra = {"positive_class": classes[index]} if binary else {"ece_by_class": class_ece[0]}
    total = len(codes) if weights is None else float(np.sum(weights))
    return record(
        out, keep, **summary, ece=ece[chosen[0]], ece_by_binning=ece, n=len(codes),
        weight_total=total, bins=bins, classes=list(classes), **extra,
    )  # fmt: skip


def _row_weights(df, model, keep):
    """The frequency weights of the rows used, when the model was fitted with a column."""
    column = getattr(model, "weight_column_", None)
    if column is None or column not in df:
        return None
    return df.loc[np.asarray(keep), column].to_numpy(dtype=np.float64)


def _weighted_scores(P, codes, positive, weights):
    """Log loss and Brier score (binary: of ``positive``; multiclass: summed), weighted."""
    n, K = P.shape
    rows = np.arange(n)
    w = np.ones(n) if weights is None else weights
    eps = np.finfo(np.float64).eps
    log_loss = float(np.average(-np.log(np.clip(P[rows, codes], eps, 1.0)), weights=w))
    if positive is not None:
        brier = float(np.average(((codes == positive) - P[:, positive]) ** 2, weights=w))
    else:
        onehot = np.zeros_like(P)
        onehot[rows, codes] = 1.0
        brier = float(np.average(np.sum((onehot - P) ** 2, axis=1), weights=w))
    return {"log_loss": log_loss, "brier": brier}


def empirical_threshold(p, pos, c_fp, c_fn, prefer):
    """Midpoint threshold of the cheapest cut of the sorted probabilities.

    Calling rows with p >= t positive, every t between two neighbouring
    distinct probabilities gives the same calls; the candidates are the
    midpoints of those gaps, plus one below the smallest and one above the
    largest probability.
    """
    u = np.unique(p)
    cuts = np.concatenate([[u[0] / 2.0], (u[:-1] + u[1:]) / 2.0, [(u[-1] + 1.0) / 2.0]])
    # Counts of negatives and positives at or above each cut, by sorting once.
    neg_sorted = np.sort(p[~pos])
    pos_sorted = np.sort(p[pos])
    fp = len(neg_sorted) - np.searchsorted(neg_sorted, cuts, side="left")
    fn = np.searchsorted(pos_sorted, cuts, side="left")
    cost = c_fp * fp + c_fn * fn
    best = np.flatnonzero(cost == cost.min())
    return float(cuts[best[np.argmin(np.abs(cuts[best] - prefer))]])


def cost_threshold_table(df, target, model, c_fp, c_fn, dropna, positive=None):
    """The decision-theoretic and the empirical cost threshold (see the accessor)."""
    P, classes, codes, keep, index = _probabilities(df, target, model, dropna, positive)
    if len(classes) != 2:
        raise ValueError(
            f"cost_threshold needs a binary target; the model has {len(classes)} classes."
        )
    p = P[:, index]
    pos = codes == index
    t_bayes = c_fp / (c_fp + c_fn)
    t_emp = empirical_threshold(p, pos, c_fp, c_fn, t_bayes)
    rows = [{"threshold": t, **call_counts(pos, p >= t)} for t in (t_bayes, t_emp)]
    out = pd.DataFrame(rows, index=pd.Index(["decision_theoretic", "empirical"], name="rule"))
    found = rates(out)
    out["sensitivity"] = found["sensitivity"]
    out["specificity"] = found["specificity"]
    out["cost"] = c_fp * out["fp"] + c_fn * out["fn"]
    out["cost_per_row"] = out["cost"] / len(p)
    attrs = {"cost_fp": c_fp, "cost_fn": c_fn}
    return record(
        out, keep, **attrs, positive_class=classes[index], negative_class=classes[1 - index]
    )


def argmax_confusion(P, codes, classes, weights=None):
    """K x K table of recorded labels against the most probable class.

    Parameters
    ----------
    P : ndarray of shape (n, K)
    codes : ndarray of shape (n,), int
        Index of each recorded label in ``classes``.
    classes : sequence of K labels
    weights : ndarray of shape (n,), optional
        Frequency weights: a cell sums the weights of its rows.

    Returns
    -------
    pandas.DataFrame
        Index ``recorded`` (the recorded label), columns ``predicted`` (the
        class of largest probability; ties go to the first class, as
        ``numpy.argmax``); integer counts, or weight sums when ``weights``
        are given. ``attrs["accuracy"]``: the (weighted) share of rows on
        the diagonal.
    """
    K = len(classes)
    predicted = np.argmax(np.asarray(P), axis=1)
    cells = np.bincount(codes * K + predicted, weights=weights, minlength=K * K).reshape(K, K)
    if weights is None:
        cells = cells.astype(np.int64)
    labels = [str(c) for c in classes]
    out = pd.DataFrame(
        cells,
        index=pd.Index(labels, name="recorded"),
        columns=pd.Index(labels, name="predicted"),
    )
    total = cells.sum()
    out.attrs["accuracy"] = float(np.trace(cells) / total) if total > 0 else float("nan")
    return out


def class_rates(table):
    """Per-class rates of a K x K argmax table (see :func:`argmax_confusion`).

    Returns
    -------
    pandas.DataFrame
        One row per class: ``recall`` (the share of the class's rows
        predicted as it; also called sensitivity), ``precision`` (the share
        of rows predicted as the class that are recorded as it), ``support``
        (its rows, or weight). A rate with an empty denominator is NaN.
    """
    cells = table.to_numpy(dtype=float)
    diag = np.diag(cells)
    support = cells.sum(axis=1)
    called = cells.sum(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        recall = np.where(support > 0, diag / support, np.nan)
        precision = np.where(called > 0, diag / called, np.nan)
    out = pd.DataFrame(
        {"recall": recall, "precision": precision, "support": table.sum(axis=1).to_numpy()},
        index=pd.Index(table.index, name="class"),
    )
    return out
