"""Summaries of weighted draws: mean, standard deviation, equal-tailed quantiles."""

import numpy as np


def weighted_moments(draws, weights):
    """Weighted mean and standard deviation of each column of ``draws`` (S, p)."""
    mean = np.dot(weights, draws)
    var = np.dot(weights, (draws - mean) ** 2)
    return mean, np.sqrt(np.maximum(var, 0.0))


def weighted_quantiles(values, weights, probs):
    """Quantiles of each row of ``values`` (m, S) under draw weights ``weights`` (S,).

    The weighted empirical distribution puts each draw's weight at its
    value; the quantile at probability a interpolates linearly between the
    sorted values at their cumulative-weight midpoints (with equal weights,
    the plotting positions (i - 1/2) / S), clamped to the smallest and the
    largest value outside the midpoints' range.

    Parameters
    ----------
    values : ndarray of shape (m, S)
    weights : ndarray of shape (S,), non-negative, summing to 1
    probs : sequence of float in [0, 1]

    Returns
    -------
    ndarray of shape (len(probs), m)
    """
    values = np.asarray(values, dtype=np.float64)
    order = np.argsort(values, axis=1, kind="stable")
    sorted_values = np.take_along_axis(values, order, axis=1)
    w = weights[order]
    mid = np.cumsum(w, axis=1) - 0.5 * w
    S = values.shape[1]
    rows = np.arange(values.shape[0])
    out = np.empty((len(probs), values.shape[0]))
    for i, a in enumerate(probs):
        hi = np.clip(np.sum(mid < a, axis=1), 1, S - 1) if S > 1 else np.zeros(len(rows), int)
        lo = np.maximum(hi - 1, 0)
        span = mid[rows, hi] - mid[rows, lo]
        with np.errstate(invalid="ignore", divide="ignore"):
            t = np.where(span > 0, (a - mid[rows, lo]) / span, 0.0)
        t = np.clip(t, 0.0, 1.0)
        out[i] = sorted_values[rows, lo] + t * (sorted_values[rows, hi] - sorted_values[rows, lo])
    return out
