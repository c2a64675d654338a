"""Data sources under the shared solvers: memory-mapped blocks and dask chunks.

The Newton iterations (Laplace, probit, the tempered model's convex start)
and the tempered model's L-BFGS need nothing from the data but sums over
rows: the loss, the gradient and the Hessian ``X^T W X``. The in-memory path
(:class:`~skbayeslogit._linear.design.LinearDesign` on one array) computes them in
one blocked pass. This module supplies the same sums for data that are not
one array in memory, by running that same in-memory pass on one piece of
rows at a time and adding the pieces:

``MemmapSource``
    A numpy memory map (``np.load(path, mmap_mode="r")``) or any array read
    in row blocks of ``block_rows`` (see :func:`set_block_rows`). Nothing of
    length n is kept: labels are encoded and weights read per block.
``DaskSource``
    A dask array or DataFrame. Each chunk of rows is one task that runs the
    in-memory pass on that chunk; dask sums the per-chunk results by a tree
    reduction and only the small p x p pieces reach the client. A
    ``dask.distributed`` Client, when one is active, runs the tasks.

``SourceDesign`` wraps a source in the interface the solvers use
(``loss_grad_hess``, ``split``, ...). The linear predictor ``eta`` is not
kept between passes (it would be as large as n): every pass recomputes it
for its block from X, which costs one matrix-vector product per block next
to the Hessian's rank-p update and reads nothing more than the pass reads
anyway. ``loss_grad_hess`` therefore returns ``eta=None`` and the Newton
line search, when it has to backtrack (rare), makes loss-only passes.

dask is optional: :func:`require_dask` names the extra to install.
"""

import numpy as np

from .._checks.inputs import _MAX_ABS_FEATURE, _plain
from .design import LinearDesign
from .layout import ParameterLayout

_DASK_EXTRA = 'pip install "skbayeslogit[dask]"'

#: Rows per block of the memory-mapped path; None: about ``_BLOCK_BYTES`` of X.
_block_rows = None
_BLOCK_BYTES = 64 << 20


def set_block_rows(rows):
    """Set the rows per block of the memory-mapped path; returns the old value.

    Parameters
    ----------
    rows : int > 0 or None
        Rows of X read, converted and processed together when X is a
        ``numpy.memmap``. Memory of a fit is a few times one block of X
        (the block itself, its linear predictor, derivatives and the
        encoded labels), whatever the number of rows. None (the default)
        means about 64 MiB of float64 X per block (419,430 rows at 20
        features). Dask input is processed one chunk at a time instead:
        rechunk it to change the block size.

    Returns
    -------
    int or None
        The previous setting.
    """
    global _block_rows
    if rows is not None and (
        isinstance(rows, bool) or not isinstance(rows, int | np.integer) or rows < 1
    ):
        raise ValueError(f"block rows must be a positive integer or None; got {rows!r}.")
    old, _block_rows = _block_rows, None if rows is None else int(rows)
    return old


def _rows_per_block(d):
    if _block_rows is not None:
        return _block_rows
    return max(1024, _BLOCK_BYTES // (8 * max(d, 1)))


# -- recognising the input -------------------------------------------------------
def is_dask_collection(obj):
    """True for dask arrays, DataFrames and Series, without importing dask."""
    return hasattr(type(obj), "__dask_graph__")


def require_dask():
    """Import dask (array and dataframe), or say which extra to install."""
    try:
        import dask
        import dask.array as da
    except ImportError as exc:
        raise ImportError(
            "Fitting or predicting on dask collections needs dask, which is not installed: "
            f"{_DASK_EXTRA}"
        ) from exc
    return dask, da


def is_out_of_core(X, y=None, sample_weight=None):
    """Whether fit input goes through a source rather than the in-memory path."""
    return isinstance(X, np.memmap) or any(is_dask_collection(v) for v in (X, y, sample_weight))


# -- per-piece kernels: the in-memory pass on one block of rows ------------------------
def _as_block(X):
    # numpy.memmap slices are memmaps; the kernels want a plain C float64 array
    # (a new type or layout would be a new numba compilation).
    return np.ascontiguousarray(np.asarray(X), dtype=np.float64)


def _newton_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[loss, gradient, Hessian.ravel()] of one block, by the in-memory pass."""
    design = LinearDesign(_as_block(X), q, fit_intercept)
    loss, grad, hess, _ = design.loss_grad_hess(likelihood, y, w, theta)
    return np.concatenate([[loss], grad, hess.ravel()])


def _loss_grad_piece(X, y, w, likelihood, theta, q, fit_intercept):
    """[loss, gradient] of one block, by the in-memory gradient pass."""
    loss, grad, _ = LinearDesign(_as_block(X), q, fit_intercept).loss_grad(likelihood, y, w, theta)
    return np.concatenate([[loss], grad])


def _loss_piece(X, y, w, likelihood, theta, q, fit_intercept):
    eta = LinearDesign(_as_block(X), q, fit_intercept).linear_predictor(theta)
    return np.array([likelihood.loss(y, eta, w)])


def _value_grad_piece(X, y, w, pointwise, theta, q, fit_intercept):
    """[sum of row losses, gradient] of one block for a pointwise loss.

    ``pointwise.value_grad(y, eta, w)`` returns the weighted loss sum and its
    gradient with respect to eta (weights included); the gradient in the
    parameters is one product with the block.
    """
    X = _as_block(X)
    eta = LinearDesign(X, q, fit_intercept).linear_predictor(theta)
    value, g_eta = pointwise.value_grad(y, eta, w)
    # np.dot, not @: dask may run pieces on threads, and matmul keeps the
    # GIL for results this small (see _design._loss_grad_hess_binary).
    if q == 1:
        parts = [[value], np.dot(X.T, g_eta)]
        if fit_intercept:
            parts.append([g_eta.sum()])
    else:
        parts = [[value], np.dot(g_eta.T, X).ravel()]
        if fit_intercept:
            parts.append(g_eta.sum(axis=0))
    return np.concatenate(parts)


def _perfect_piece(X, y, w, likelihood, theta, q, fit_intercept, margin):
    """Rows with positive weight fitted with probability 1 to within 1e-12."""
    eta = LinearDesign(_as_block(X), q, fit_intercept).linear_predictor(theta)
    if q == 1:
        perfect = np.where(y > 0.5, eta, -eta) > margin
    else:
        logp = likelihood._log_softmax(eta)
        perfect = logp[np.arange(len(y)), y.astype(int)] > -1e-12
    return np.array([float(np.sum(perfect & (w > 0)))])


def _stats_piece(X, labels, w):
    """Checks and column moments of one block (merged by ``_merge_stats``).

    Returns a dict: rows with NaN / infinity, the first bad cell, column
    max |x|, the labels present (all rows, and rows with weight > 0), the
    weight checks, and the weight, weighted mean, weighted centred sum of
    squares and weighted sum of squares of every column.
    """
    X = np.asarray(X)
    if X.dtype.kind not in "fiub":
        raise ValueError(f"X must hold real numbers; got dtype {X.dtype}.")
    X = _as_block(X)
    w = np.ones(len(X)) if w is None else np.asarray(w, dtype=np.float64)
    labels = np.asarray(labels)
    nan, inf = np.isnan(X), np.isinf(X)
    bad = nan | inf
    first = None
    if bad.any():
        first = tuple(int(v) for v in np.argwhere(bad)[0])
    total = float(w.sum()) if np.all(np.isfinite(w)) else 0.0
    safe = np.where(bad, 0.0, X)
    if total > 0:
        mean = (w @ safe) / total
        m2 = w @ (safe - mean) ** 2
    else:
        mean = m2 = np.zeros(X.shape[1])
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
        "sq": w @ safe**2,
    }


def _merge_stats(parts):
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
        for key in ("n", "nan_rows", "inf_rows", "w_sum", "sq"):
            out[key] = out[key] + s[key]
        if out["first_bad"] is None:
            out["first_bad"] = s["first_bad"]
        out["colmax"] = np.maximum(out["colmax"], s["colmax"])
        out["labels"] = np.union1d(out["labels"], s["labels"])
        out["labels_pos"] = np.union1d(out["labels_pos"], s["labels_pos"])
        out["w_min"] = min(out["w_min"], s["w_min"])
        out["w_finite"] = out["w_finite"] and s["w_finite"]
    return out


def _encode_piece(labels, classes, q):
    codes = np.searchsorted(classes, np.asarray(labels))
    return codes.astype(np.float64) if q == 1 else codes.astype(np.int64)


# -- sources ---------------------------------------------------------------------
class MemmapSource:
    """Rows of a (memory-mapped) array read in blocks; nothing of length n kept.

    Parameters
    ----------
    X : array of shape (n, d)
        Usually ``np.load(path, mmap_mode="r")``; never written to.
    labels : array of shape (n,)
        Raw labels (may be a memory map too).
    w : array of shape (n,) or None
    """

    def __init__(self, X, labels, w):
        self.X, self.labels, self.w = X, labels, w
        self.n, self.d = X.shape
        self.rows = _rows_per_block(self.d)
        self.passes = 0

    def _blocks(self):
        for start in range(0, self.n, self.rows):
            sl = slice(start, min(start + self.rows, self.n))
            yield self.X[sl], self.labels[sl], None if self.w is None else self.w[sl]

    def stats(self):
        self.passes += 1
        return _merge_stats(_stats_piece(X, y, w) for X, y, w in self._blocks())

    def set_classes(self, classes, q):
        self.classes, self.q = classes, q

    def reduce(self, piece, *args):
        """Sum over blocks of ``piece(X_b, y_b, w_b, *args)``, in row order."""
        self.passes += 1
        total = None
        for X, labels, w in self._blocks():
            y = _encode_piece(labels, self.classes, self.q)
            w = np.ones(len(y)) if w is None else np.asarray(w, dtype=np.float64)
            part = piece(X, y, w, *args)
            total = part if total is None else total + part
        return total

    def take(self, idx):
        """Rows ``idx`` (sorted) as in-memory arrays: X, encoded y, w."""
        self.passes += 1
        X = _as_block(self.X[idx])
        y = _encode_piece(self.labels[idx], self.classes, self.q)
        w = np.ones(len(idx)) if self.w is None else np.asarray(self.w[idx], dtype=np.float64)
        return X, y, w


def _dask_piece(X, y, w, piece=None, args=()):
    # One chunk's result as a (1, P) block, so that dask can sum the blocks.
    return piece(X, y[:, 0], w[:, 0], *args)[None, :]


class DaskSource:
    """A dask array or DataFrame (and labels, weights) processed chunk by chunk.

    Parameters
    ----------
    X : dask array or DataFrame of shape (n, d)
    labels : dask or numpy array, pandas or dask Series, of shape (n,)
    w : same kinds, or None
    """

    def __init__(self, X, labels, w):
        dask, da = require_dask()
        self._dask, self._da = dask, da
        self.feature_names = None
        if not hasattr(X, "chunks"):  # a DataFrame: its columns become features
            if not hasattr(X, "to_dask_array"):
                raise TypeError(f"unsupported dask input for X: {type(X).__name__}.")
            cols = list(X.columns)
            if cols and all(isinstance(c, str) for c in cols):
                self.feature_names = np.asarray(cols, dtype=object)
            X = X.to_dask_array(lengths=True)
        if X.ndim != 2:
            raise ValueError(f"Expected a 2D dask array for X, got {X.ndim}D.")
        # One chunk across the columns: a chunk's task then holds whole rows.
        X = X.rechunk({1: -1})
        rows = X.chunks[0]
        self.X = X
        self.labels = self._align(labels, rows, "y")
        self.w = None if w is None else self._align(w, rows, "sample_weight")
        self.n, self.d = X.shape
        self.passes = 0

    def _align(self, v, rows, name):
        da = self._da
        if hasattr(v, "to_dask_array"):
            v = v.to_dask_array(lengths=True)
        elif not is_dask_collection(v):
            v = np.asarray(v)
            if v.shape != (sum(rows),):
                raise ValueError(f"{name} has shape {v.shape}; expected ({sum(rows)},).")
            return da.from_array(v, chunks=(rows,))
        if v.ndim != 1 or v.shape[0] != sum(rows):
            raise ValueError(f"{name} has shape {v.shape}; expected ({sum(rows)},).")
        return v.rechunk((rows,))

    def stats(self):
        self.passes += 1
        delayed = self._dask.delayed
        xs = self.X.to_delayed().ravel()
        ys = self.labels.to_delayed().ravel()
        ws = [None] * len(xs) if self.w is None else self.w.to_delayed().ravel()
        tasks = [delayed(_stats_piece)(*t) for t in zip(xs, ys, ws, strict=True)]
        parts = self._dask.compute(*tasks)
        return _merge_stats(parts)

    def set_classes(self, classes, q):
        self.classes, self.q = classes, q
        dtype = np.float64 if q == 1 else np.int64
        self.y = self.labels.map_blocks(_encode_piece, classes, q, dtype=dtype)
        self.w_full = (
            self._da.ones(self.n, chunks=(self.X.chunks[0],))
            if self.w is None
            else self.w.astype(np.float64)
        )

    def reduce(self, piece, *args):
        """Sum over chunks of ``piece(X_c, y_c, w_c, *args)``, by dask's tree reduction."""
        self.passes += 1
        da = self._da
        width = len(piece(np.zeros((1, self.d)), *self._probe(), *args))
        parts = da.map_blocks(
            _dask_piece,
            self.X,
            self.y[:, None],
            self.w_full[:, None],
            piece=piece,
            args=args,
            chunks=((1,) * self.X.numblocks[0], (width,)),
            dtype=np.float64,
        )
        return parts.sum(axis=0, split_every=8).compute()

    def _probe(self):
        # One dummy row of the right types, to learn the width of a piece's result.
        y = np.zeros(1, dtype=np.float64 if self.q == 1 else np.int64)
        return y, np.zeros(1)

    def take(self, idx):
        self.passes += 1
        X, y, w = self._dask.compute(self.X[idx], self.y[idx], self.w_full[idx])
        return _as_block(X), y, np.asarray(w, dtype=np.float64)


def make_source(X, y, sample_weight):
    """The source for out-of-core fit input (see :func:`is_out_of_core`)."""
    if any(is_dask_collection(v) for v in (X, y, sample_weight)):
        if not is_dask_collection(X):
            _, da = require_dask()
            X = np.asarray(X)
            X = da.from_array(X, chunks=(max(1, _rows_per_block(X.shape[1])), -1))
        return DaskSource(X, y, sample_weight)
    if X.ndim != 2:
        raise ValueError(f"Expected 2D array, got {X.ndim}D array instead.")
    y = np.asarray(y) if not isinstance(y, np.ndarray) else y
    if y.shape != (X.shape[0],):
        raise ValueError(f"y has shape {y.shape}; expected ({X.shape[0]},).")
    if sample_weight is not None:
        sample_weight = np.asarray(sample_weight)
        if sample_weight.shape != (X.shape[0],):
            raise ValueError(
                f"sample_weight has shape {sample_weight.shape}; expected ({X.shape[0]},)."
            )
    return MemmapSource(X, y, sample_weight)


# -- validation, as the in-memory checks but blockwise --------------------------------
def validate_source(estimator, source):
    """Run the fit checks in one pass; set ``classes_`` and the feature attributes.

    Returns the merged block statistics (``_stats_piece``) for the column
    moments that ``prior_scale="auto"`` and the tempered model use.
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
    colmax = st["colmax"]
    big = colmax > _MAX_ABS_FEATURE
    tiny = (colmax > 0) & (colmax < 1.0 / _MAX_ABS_FEATURE)
    if np.any(big | tiny):
        j = int(np.flatnonzero(big | tiny)[0])
        raise ValueError(
            f"feature column {j} has values of magnitude {colmax[j]:.3g}, outside "
            f"[{1 / _MAX_ABS_FEATURE:.0e}, {_MAX_ABS_FEATURE:.0e}]: products of such "
            "features overflow or underflow float64. Rescale the features."
        )
    classes = st["labels"]
    if len(classes) < 2:
        raise ValueError(
            f"y contains only one class ({_plain(classes[0])!r}); a classifier needs "
            "at least two classes."
        )
    if estimator._binary_only and len(classes) > 2:
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
                f"({_plain(st['labels_pos'][0])!r}); a classifier needs at least two classes."
            )
    estimator.classes_ = classes
    estimator.n_features_in_ = source.d
    names = getattr(source, "feature_names", None)
    if names is not None:
        estimator.feature_names_in_ = names
    elif hasattr(estimator, "feature_names_in_"):
        del estimator.feature_names_in_
    q = 1 if len(classes) == 2 else len(classes)
    source.set_classes(classes, q)
    return st


class SourceDesign(LinearDesign):
    """A :class:`LinearDesign` whose rows live in a source, not in one array.

    Same parameter layout and the same per-row kernels; each pass is one
    ``source.reduce`` of the in-memory pass over a block. ``y`` and ``w``
    live in the source: the arguments of that name are ignored (None).

    Parameters
    ----------
    source : MemmapSource or DaskSource
    n_outputs : int
    fit_intercept : bool
    stats : dict
        From :func:`validate_source`.
    """

    out_of_core = True

    def __init__(self, source, n_outputs, fit_intercept, stats):
        self.source = source
        self.X = None
        self.n, self.d = source.n, source.d
        self._set_layout(ParameterLayout(n_outputs, self.d, fit_intercept))
        self.block_rows = None
        self.stats = stats
        self.total_weight = stats["w_sum"]

    def loss_grad_hess(self, likelihood, y, w, theta, eta=None):
        """Loss sum, gradient and Hessian at ``theta``; eta is not kept (None)."""
        p = self.p_full
        packed = self.source.reduce(
            _newton_piece, likelihood, np.asarray(theta), self.q, self.fit_intercept
        )
        hess = packed[1 + p :].reshape(p, p)
        # Each block's Hessian is symmetric; the sum is, up to rounding.
        hess = 0.5 * (hess + hess.T)
        return float(packed[0]), packed[1 : 1 + p].copy(), hess, None

    def loss_grad(self, likelihood, y, w, theta):
        """Loss sum and gradient at ``theta``; eta is not kept (None)."""
        out = self.source.reduce(
            _loss_grad_piece, likelihood, np.asarray(theta), self.q, self.fit_intercept
        )
        return float(out[0]), out[1:].copy(), None

    def loss(self, likelihood, theta):
        """Loss sum at ``theta`` (a pass that recomputes eta block by block)."""
        out = self.source.reduce(_loss_piece, likelihood, theta, self.q, self.fit_intercept)
        return float(out[0])

    def value_grad(self, pointwise, theta):
        """Loss sum and parameter gradient of a pointwise loss (see ``_value_grad_piece``)."""
        out = self.source.reduce(_value_grad_piece, pointwise, theta, self.q, self.fit_intercept)
        return float(out[0]), out[1:]

    def count_perfect(self, likelihood, theta, margin):
        out = self.source.reduce(
            _perfect_piece, likelihood, theta, self.q, self.fit_intercept, margin
        )
        return int(out[0])

    def take(self, idx):
        """In-memory X, y, w of rows ``idx`` (for the subsample warm start)."""
        return self.source.take(idx)

    def column_moments(self, centred=True):
        """Weighted column mean and sd (centred) or root mean square (not)."""
        st = self.stats
        if centred:
            return st["mean"], np.sqrt(np.maximum(st["m2"], 0.0) / st["w_sum"])
        return np.zeros(self.d), np.sqrt(st["sq"] / st["w_sum"])


def fit_design(estimator, X, y, sample_weight, fit_intercept):
    """Validate out-of-core fit input and wrap it in a :class:`SourceDesign`."""
    source = make_source(X, y, sample_weight)
    stats = validate_source(estimator, source)
    q = 1 if len(estimator.classes_) == 2 else len(estimator.classes_)
    return SourceDesign(source, q, fit_intercept, stats)


# -- prediction on dask input ------------------------------------------------------
def dask_aware(method):
    """Decorate a predict method: dask input gives lazy, block-wise dask output.

    Each chunk of rows is predicted by the method itself on numpy input
    (the fitted estimator travels with the task); the result's other
    dimensions are learnt from a one-row call. Methods that return a pair
    (``logit_moments``, ``predict_interval``) give a pair of dask arrays.
    """
    import functools

    @functools.wraps(method)
    def wrapper(self, X, *args, **kwargs):
        if not is_dask_collection(X):
            return method(self, X, *args, **kwargs)
        return _predict_dask(self, method, X, args, kwargs)

    return wrapper


def _predict_dask(estimator, method, X, args, kwargs):
    _, da = require_dask()
    from sklearn.utils.validation import check_is_fitted

    check_is_fitted(estimator, "coef_")
    if not hasattr(X, "chunks"):
        if not hasattr(X, "to_dask_array"):
            raise TypeError(f"unsupported dask input for X: {type(X).__name__}.")
        names = getattr(estimator, "feature_names_in_", None)
        if names is not None and list(X.columns) != list(names):
            raise ValueError(
                "The feature names should match those that were passed during fit: "
                f"got {list(X.columns)}, expected {list(names)}."
            )
        X = X.to_dask_array(lengths=True)
    if X.ndim != 2 or X.shape[1] != estimator.n_features_in_:
        raise ValueError(
            f"X has shape {X.shape}, but {type(estimator).__name__} is expecting "
            f"{estimator.n_features_in_} features as input."
        )
    X = X.rechunk({1: -1})
    names = getattr(estimator, "feature_names_in_", None)

    def as_input(Xb):
        # Named columns for a model fitted with names: scikit-learn would
        # otherwise warn on every block.
        if names is None:
            return Xb
        import pandas as pd

        return pd.DataFrame(Xb, columns=names)

    probe = method(estimator, as_input(np.zeros((1, X.shape[1]))), *args, **kwargs)

    def one(out_index, sample):
        sample = np.asarray(sample)
        extra = sample.shape[1:]

        def block(Xb):
            res = method(estimator, as_input(Xb), *args, **kwargs)
            return res if out_index is None else res[out_index]

        chunks = (X.chunks[0], *((s,) for s in extra))
        drop = None if extra else 1
        new = list(range(2, 1 + len(extra))) if len(extra) > 1 else None
        return X.map_blocks(
            block,
            dtype=sample.dtype,
            chunks=chunks,
            drop_axis=drop,
            new_axis=new,
            meta=np.empty((0,) * sample.ndim, dtype=sample.dtype),
        )

    if isinstance(probe, tuple):
        return tuple(one(i, s) for i, s in enumerate(probe))
    return one(None, probe)
