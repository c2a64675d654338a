"""One block of rows at a time: the in-memory passes on a block, and block statistics.

The data sources (``sources``) call these on each block of a memory map or
each dask chunk and add the results; the statistics of the blocks are merged
by Chan et al.'s pairwise update and checked as the in-memory input is.
"""

import numpy as np

from .._checks.inputs import check_column_magnitudes, plain
from .columns import weighted_sums
from .design import LinearDesign


def as_block(X):
    # numpy.memmap slices are memmaps; the kernels want a plain C float64 array
    # (a new type or layout would be a new numba compilation).
    return np.ascontiguousarray(np.asarray(X), dtype=np.float64)


def newton_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[loss, gradient, Hessian.ravel()] of one block, by the in-memory pass."""
    design = LinearDesign(as_block(X), q, fit_intercept)
    loss, grad, hess, _ = design.loss_grad_hess(likelihood, y, w, theta)
    return np.concatenate([[loss], grad, hess.ravel()])


def loss_grad_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[loss, gradient] of one block, by the in-memory gradient pass."""
    loss, grad, _ = LinearDesign(as_block(X), q, fit_intercept).loss_grad(likelihood, y, w, theta)
    return np.concatenate([[loss], grad])


def loss_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[loss] of one block."""
    return np.array([LinearDesign(as_block(X), q, fit_intercept).loss(likelihood, theta, y, w)])


def perfect_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[rows of positive weight fitted with certainty] of one block (``count_perfect``)."""
    design = LinearDesign(as_block(X), q, fit_intercept)
    return np.array([float(design.count_perfect(likelihood, theta, y, w))])


def stats_piece(X, labels, w):
    """Checks and column moments of one block (merged by ``merge_stats``).

    Returns a dict: rows with NaN / infinity, the first bad cell, column
    max |x|, the labels present (all rows, and rows with weight > 0), the
    weight checks, and the weight total, weighted mean and weighted centred
    sum of squares of every column (``columns.weighted_sums``).
    """
    X = np.asarray(X)
    if X.dtype.kind not in "fiub":
        raise ValueError(f"X must hold real numbers; got dtype {X.dtype}.")
    X = as_block(X)
    w = np.ones(len(X)) if w is None else np.asarray(w, dtype=np.float64)
    labels = np.asarray(labels)
    nan, inf = np.isnan(X), np.isinf(X)
    bad = nan | inf
    first = None
    if bad.any():
        first = tuple(int(v) for v in np.argwhere(bad)[0])
    safe = np.where(bad, 0.0, X)
    if np.all(np.isfinite(w)):
        total, mean, m2 = weighted_sums(safe, w)
    else:
        total, mean, m2 = 0.0, np.zeros(X.shape[1]), np.zeros(X.shape[1])
    return {
        "n": len(X),
        "nan_rows": int(nan.any(axis=1).sum()),
        "inf_rows": int(inf.any(axis=1).sum()),
        "first_bad": first,
        "colmax": np.max(np.abs(safe), axis=0) if len(X) else np.zeros(X.shape[1]),
        "labels": np.unique(labels),
        "labels_pos": np.unique(labels[w > 0]),
        "w_min": float(w.min()) if len(w) else 0.0,
        "w_finite": bool(np.all(np.isfinite(w))),
        "w_sum": total,
        "mean": mean,
        "m2": m2,
    }


def merge_stats(parts):
    """Combine block statistics; moments by Chan et al.'s pairwise update."""
    out = None
    offset = 0
    for s in parts:
        if s["first_bad"] is not None:
            s = dict(s, first_bad=(s["first_bad"][0] + offset, s["first_bad"][1]))
        offset += s["n"]
        if out is None:
            out = dict(s)
            continue
        wa, wb = out["w_sum"], s["w_sum"]
        if wb > 0:
            delta = s["mean"] - out["mean"]
            tot = wa + wb
            out["mean"] = out["mean"] + delta * (wb / tot)
            out["m2"] = out["m2"] + s["m2"] + delta**2 * (wa * wb / tot)
        for key in ("n", "nan_rows", "inf_rows", "w_sum"):
            out[key] = out[key] + s[key]
        if out["first_bad"] is None:
            out["first_bad"] = s["first_bad"]
        out["colmax"] = np.maximum(out["colmax"], s["colmax"])
        out["labels"] = np.union1d(out["labels"], s["labels"])
        out["labels_pos"] = np.union1d(out["labels_pos"], s["labels_pos"])
        out["w_min"] = min(out["w_min"], s["w_min"])
        out["w_finite"] = out["w_finite"] and s["w_finite"]
    return out


def encode_piece(labels, classes, q):
    codes = np.searchsorted(classes, np.asarray(labels))
    return codes.astype(np.float64) if q == 1 else codes.astype(np.int64)


def check_source(source, binary_only):
    """Run the fit checks of a source in one pass; tell it its classes.

    Returns
    -------
    stats : dict
        The merged block statistics (``stats_piece``): column moments and
        ranges, ``stats["labels"]`` the sorted classes.
    """
    if source.n < 1:
        raise ValueError("Found array with 0 sample(s) while a minimum of 1 is required.")
    st = source.stats()
    if st["nan_rows"] or st["inf_rows"]:
        parts = []
        for what, key in (("NaN", "nan_rows"), ("infinity", "inf_rows")):
            if st[key]:
                parts.append(f"{what} in {st[key]} row(s)")
        i, j = st["first_bad"]
        raise ValueError(
            f"Input X contains {' and '.join(parts)} (first at row {i}, column {j}). Drop or "
            "impute missing values and replace infinite ones."
        )
    check_column_magnitudes(st["colmax"], per_column=True)
    classes = st["labels"]
    if len(classes) < 2:
        raise ValueError(
            f"y contains only one class ({plain(classes[0])!r}); a classifier needs "
            "at least two classes."
        )
    if binary_only and len(classes) > 2:
        raise ValueError("Only binary classification is supported.")
    if source.w is not None:
        if not st["w_finite"]:
            raise ValueError("sample_weight contains NaN or infinity.")
        if st["w_min"] < 0:
            raise ValueError("Negative values in data passed to sample_weight")
        if st["w_sum"] <= 0:
            raise ValueError("sample_weight sums to zero; at least one row needs weight > 0.")
        if len(st["labels_pos"]) < 2:
            raise ValueError(
                "only one class has positive sample_weight "
                f"({plain(st['labels_pos'][0])!r}); a classifier needs at least two classes."
            )
    q = 1 if len(classes) == 2 else len(classes)
    source.set_classes(classes, q)
    return st
