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

``SourceDesign`` wraps a source in the design protocol the solvers use
(``DesignBase``: ``loss_grad_hess``, ``split``, ``column_moments``, ...).
The linear predictor ``eta`` is not kept between passes (it would be as
large as n): every pass recomputes it for its block from X, which costs one
matrix-vector product per block next to the Hessian's rank-p update and
reads nothing more than the pass reads
anyway. ``loss_grad_hess`` therefore returns ``eta=None`` and the Newton
line search, when it has to backtrack (rare), makes loss-only passes.

dask is optional: :func:`require_dask` names the extra to install.

This is the one module that asks which kind of data a fit was given
(:func:`is_out_of_core`); :func:`fit_data` answers with a design, and
everything after it asks the design.
"""

import contextlib
from dataclasses import dataclass

import numpy as np

from .blocks import (
    as_block,
    check_source,
    encode_piece,
    loss_grad_piece,
    loss_piece,
    merge_stats,
    newton_piece,
    perfect_piece,
    stats_piece,
)
from .columns import moments_from_sums
from .dask_io import dask_aware, is_dask_collection, require_dask
from .design import DesignBase, LinearDesign

__all__ = [
    "DaskSource",
    "FitData",
    "MemmapSource",
    "SourceDesign",
    "dask_aware",
    "fit_data",
    "is_dask_collection",
    "is_out_of_core",
    "make_source",
    "require_dask",
    "set_block_rows",
]

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


def rows_per_block(d):
    """Rows per block of the memory-mapped path for d features."""
    if _block_rows is not None:
        return _block_rows
    return max(1024, _BLOCK_BYTES // (8 * max(d, 1)))


def is_out_of_core(X, y=None, sample_weight=None):
    """Whether fit input goes through a source rather than the in-memory path."""
    return isinstance(X, np.memmap) or any(is_dask_collection(v) for v in (X, y, sample_weight))


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
        self.rows = rows_per_block(self.d)
        self.passes = 0

    def _blocks(self):
        for start in range(0, self.n, self.rows):
            sl = slice(start, min(start + self.rows, self.n))
            yield self.X[sl], self.labels[sl], None if self.w is None else self.w[sl]

    def stats(self):
        """Merged ``stats_piece`` of every block."""
        self.passes += 1
        return merge_stats(stats_piece(X, y, w) for X, y, w in self._blocks())

    def set_classes(self, classes, q):
        """The sorted classes and outputs that encode the labels of every pass."""
        self.classes, self.q = classes, q

    def reduce(self, piece, *args):
        """Sum over blocks of ``piece(X_b, y_b, w_b, *args)``, in row order."""
        self.passes += 1
        total = None
        for X, labels, w in self._blocks():
            y = encode_piece(labels, self.classes, self.q)
            w = np.ones(len(y)) if w is None else np.asarray(w, dtype=np.float64)
            part = piece(X, y, w, *args)
            total = part if total is None else total + part
        return total

    def take(self, idx):
        """Rows ``idx`` (sorted) as in-memory arrays: X, encoded y, w."""
        self.passes += 1
        X = as_block(self.X[idx])
        y = encode_piece(self.labels[idx], self.classes, self.q)
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
        """Merged ``stats_piece`` of every chunk."""
        self.passes += 1
        delayed = self._dask.delayed
        xs = self.X.to_delayed().ravel()
        ys = self.labels.to_delayed().ravel()
        ws = [None] * len(xs) if self.w is None else self.w.to_delayed().ravel()
        tasks = [delayed(stats_piece)(*t) for t in zip(xs, ys, ws, strict=True)]
        parts = self._dask.compute(*tasks)
        return merge_stats(parts)

    def set_classes(self, classes, q):
        """The sorted classes and outputs; the encoded labels as a dask array."""
        self.classes, self.q = classes, q
        dtype = np.float64 if q == 1 else np.int64
        self.y = self.labels.map_blocks(encode_piece, classes, q, dtype=dtype)
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
        """Rows ``idx`` (sorted) as in-memory arrays: X, encoded y, w."""
        self.passes += 1
        X, y, w = self._dask.compute(self.X[idx], self.y[idx], self.w_full[idx])
        return as_block(X), y, np.asarray(w, dtype=np.float64)


def make_source(X, y, sample_weight):
    """The source for out-of-core fit input (see :func:`is_out_of_core`)."""
    if any(is_dask_collection(v) for v in (X, y, sample_weight)):
        if not is_dask_collection(X):
            _, da = require_dask()
            X = np.asarray(X)
            X = da.from_array(X, chunks=(max(1, rows_per_block(X.shape[1])), -1))
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


def shifted_piece(X, y, w, piece, shift, *args):
    """``piece`` on a block whose columns are moved by ``-shift`` (a centred design's pass)."""
    return piece(as_block(X) - shift, y, w, *args)


class SourceDesign(DesignBase):
    """The design protocol over rows that live in a source, not in one array.

    Same parameter layout and the same per-row kernels as
    :class:`LinearDesign`; each pass is one ``source.reduce`` of the
    in-memory pass over a block. ``y`` and ``w`` live in the source: the
    arguments of that name are ignored (None).

    Parameters
    ----------
    source : MemmapSource or DaskSource
    n_outputs : int
    fit_intercept : bool
    stats : dict
        From ``blocks.check_source``: the weight total, column moments and
        ranges are kept from it.
    shift : ndarray of shape (d,) or None
        Subtracted from every block's columns before its pass (see
        :meth:`centred`); None: the columns as they are.
    """

    def __init__(self, source, n_outputs, fit_intercept, stats, shift=None):
        super().__init__(source.n, source.d, n_outputs, fit_intercept)
        self.source = source
        self.stats = stats
        self.shift = shift
        mean = stats["mean"] if shift is None else stats["mean"] - shift
        self._column_sums = (stats["w_sum"], mean, stats["m2"])
        self._column_max_abs = stats["colmax"] if shift is None else stats["colmax"] + abs(shift)

    def centred(self, shift):
        """The same rows with ``shift`` subtracted from the columns, block by block.

        Nothing is read: the column moments move by the shift (the spread
        stays), and every pass subtracts it from a block after reading it.
        ``column_max_abs`` becomes an upper bound, max|x| + |shift|.
        """
        return SourceDesign(self.source, self.q, self.fit_intercept, self.stats, shift)

    def _reduce(self, piece, theta, likelihood):
        """``source.reduce`` of a block piece at ``theta`` (on shifted blocks if centred)."""
        args = (likelihood, np.asarray(theta), self.q, self.fit_intercept)
        if self.shift is None:
            return self.source.reduce(piece, *args)
        return self.source.reduce(shifted_piece, piece, self.shift, *args)

    def loss_grad_hess(self, likelihood, y, w, theta, eta=None):
        """Loss sum, gradient and Hessian at ``theta``; eta is not kept (None)."""
        p = self.p_full
        packed = self._reduce(newton_piece, theta, likelihood)
        hess = packed[1 + p :].reshape(p, p)
        # Each block's Hessian is symmetric; the sum is, up to rounding.
        hess = 0.5 * (hess + hess.T)
        return float(packed[0]), packed[1 : 1 + p].copy(), hess, None

    def loss_grad(self, likelihood, y, w, theta):
        """Loss sum and gradient at ``theta``; eta is not kept (None)."""
        out = self._reduce(loss_grad_piece, theta, likelihood)
        return float(out[0]), out[1:].copy(), None

    def loss(self, likelihood, theta, y=None, w=None, eta=None):
        """Loss sum at ``theta`` (a pass that recomputes eta block by block)."""
        return float(self._reduce(loss_piece, theta, likelihood)[0])

    def count_perfect(self, likelihood, theta, y=None, w=None, eta=None):
        """Rows of positive weight whose label is fitted with certainty (one pass)."""
        return int(self._reduce(perfect_piece, theta, likelihood)[0])

    def take(self, idx, y=None, w=None):
        """In-memory X, y, w of rows ``idx`` (for the subsample warm start)."""
        X, y, w = self.source.take(idx)
        return (X if self.shift is None else X - self.shift), y, w

    def weight_total(self, w=None):
        """Sum of the row weights, from the validation pass."""
        return self._column_sums[0]

    def column_moments(self, w=None, centred=True):
        """Weighted column centre and spread, merged from the validation pass."""
        return moments_from_sums(*self._column_sums, centred)

    def column_max_abs(self):
        """Largest |x| of each column, from the validation pass."""
        return self._column_max_abs

    def rows_in_memory(self, y=None, w=None):
        """None: the rows stay in the source."""
        return None

    def pass_threads(self):
        """Context of a fit's passes: the source's passes use BLAS's own threads."""
        return contextlib.nullcontext()


@dataclass
class FitData:
    """What a fit needs of its input, whatever kind of data that is.

    Attributes
    ----------
    design : LinearDesign or SourceDesign
    y, w : ndarray or None
        Encoded labels (float64 0/1 for one output, int64 codes otherwise)
        and weights, for designs that do not hold them (None otherwise).
    classes : ndarray
    n_features : int
    feature_names : ndarray or None
        None when the input had no string column names.
    """

    design: DesignBase
    y: np.ndarray | None
    w: np.ndarray | None
    classes: np.ndarray
    n_features: int
    feature_names: np.ndarray | None

    def record(self, estimator):
        """Set the estimator's ``classes_``, ``n_features_in_`` and ``feature_names_in_``."""
        estimator.classes_ = self.classes
        estimator.n_features_in_ = self.n_features
        if self.feature_names is not None:
            estimator.feature_names_in_ = self.feature_names
        elif hasattr(estimator, "feature_names_in_"):
            del estimator.feature_names_in_


def fit_data(X, y, sample_weight, *, fit_intercept, binary_only, validate):
    """Validate fit input of any kind and wrap it in a design.

    Parameters
    ----------
    X, y, sample_weight
        As passed to ``fit``: arrays in memory, a numpy memory map, or dask
        collections.
    fit_intercept, binary_only : bool
    validate : callable
        ``validate(X, y, sample_weight) -> (X, codes, w, classes,
        feature_names)`` for input in memory (the estimator's checks).

    Returns
    -------
    FitData
    """
    if is_out_of_core(X, y, sample_weight):
        source = make_source(X, y, sample_weight)
        stats = check_source(source, binary_only)
        classes = stats["labels"]
        q = 1 if len(classes) == 2 else len(classes)
        design = SourceDesign(source, q, fit_intercept, stats)
        names = getattr(source, "feature_names", None)
        return FitData(design, None, None, classes, source.d, names)
    X, codes, w, classes, names = validate(X, y, sample_weight)
    q = 1 if len(classes) == 2 else len(classes)
    y_fit = codes.astype(np.float64) if q == 1 else codes
    return FitData(LinearDesign(X, q, fit_intercept), y_fit, w, classes, X.shape[1], names)


def dense_matrix(design):
    """The in-memory feature matrix of a design, or None for a memmap or dask source."""
    return design.X if isinstance(design, LinearDesign) else None
