"""The linear predictor eta = X W^T + b, evaluated block by block over rows.

This is the only place that touches the feature matrix during a fit. It never
copies X as a whole (the intercept is handled as a separate term, not as an
appended column of ones). Two passes are offered: loss and gradient
(``loss_grad``, the solver's cheap pass) and loss, gradient and Hessian
(``loss_grad_hess``), each reading every block of rows once, in blocks small
enough to stay in cache, with row spans spread over worker threads. The same
blocked passes are what an out-of-core or distributed data source provides.

The parameter vector's layout is :class:`~.layout.ParameterLayout`'s; the
design carries one as ``layout``.
"""

import functools

import numpy as np

from .._kernels.softmax import pack_outer
from .columns import column_moments, column_range
from .layout import ParameterLayout
from .threads import map_tasks, passes_own_threads, row_spans, worker_count

# ~1 MiB of X per block: the fastest measured for the gradient and Hessian
# passes on a 512 KiB-L2 core (smaller blocks pay more per-block calls).
_BLOCK_BYTES = 1 << 20
# Packed outer products per GEMM in the multiclass Hessian pass: 2 MiB, the
# fastest of the sizes measured (benchmarks/README.md).
_OUTER_BYTES = 1 << 21


@functools.lru_cache(maxsize=16)
def _lower_indices(p):
    """Row and column indices of the strictly lower triangle of a p x p matrix."""
    return np.tril_indices(p, -1)


class DesignBase:
    """What every design shares: n rows of d features and a parameter layout.

    A design is asked, whatever holds its rows (one array in memory, a
    memory map, dask chunks), for the passes of the solvers
    (``loss_grad_hess``, ``loss_grad``, ``loss``), the column statistics
    (``column_moments``, ``column_max_abs``), identification counts
    (``count_perfect``), rows in memory (``take``), the weight total
    (``weight_total``) and the thread policy of its passes
    (``pass_threads``). Arguments ``y`` and ``w`` are the encoded labels and
    row weights of designs that do not hold them; designs that hold them
    ignore these arguments (None).

    Parameters
    ----------
    n, d : int
        Rows and feature columns.
    n_outputs : int
    fit_intercept : bool
    """

    def __init__(self, n, d, n_outputs, fit_intercept):
        self.n, self.d = int(n), int(d)
        self.layout = ParameterLayout(n_outputs, self.d, fit_intercept)
        self.q, self.fit_intercept = self.layout.q, self.layout.fit_intercept
        self.n_coef, self.p_full = self.layout.n_coef, self.layout.p_full

    def split(self, theta):
        """Coefficients (q, d) and intercepts (q,) from a full vector."""
        return self.layout.split(theta)


class LinearDesign(DesignBase):
    """Row-blocked linear predictor over a float64 feature matrix.

    Parameters
    ----------
    X : ndarray of shape (n, d), float64
        Used as is, never written to. C order makes the row blocks contiguous.
    n_outputs : int
        q, the number of linear predictors per row (1 or K).
    fit_intercept : bool
    block_rows : int, optional
        Rows per block; by default about 1 MiB of X per block.
    """

    def __init__(self, X, n_outputs, fit_intercept, block_rows=None):
        super().__init__(X.shape[0], X.shape[1], n_outputs, fit_intercept)
        self.X = X
        if block_rows is None:
            block_rows = max(256, _BLOCK_BYTES // (8 * max(self.d, 1)))
        self.block_rows = int(block_rows)

    # -- the design protocol (see DesignBase) --------------------------------
    def take(self, idx, y, w):
        """X (C order), y and w of rows ``idx``, in memory."""
        return np.ascontiguousarray(self.X[idx]), y[idx], w[idx]

    def weight_total(self, w):
        """Sum of the row weights."""
        return float(w.sum())

    def column_moments(self, w=None, centred=True):
        """Weighted column centre and spread (``columns.moments_from_sums``)."""
        return column_moments(self.X, w, centred)

    def column_max_abs(self):
        """Largest |x| of each column."""
        colmin, colmax = column_range(np.ascontiguousarray(self.X))
        return np.maximum(np.abs(colmin), np.abs(colmax))

    def loss(self, likelihood, theta, y, w, eta=None):
        """Loss sum at ``theta``; ``eta``, the predictor there, when known."""
        return likelihood.loss(y, self.linear_predictor(theta) if eta is None else eta, w)

    def count_perfect(self, likelihood, theta, y, w, eta=None):
        """Rows of positive weight whose label is fitted with probability > 1 - 1e-12."""
        eta = self.linear_predictor(theta) if eta is None else eta
        return int(np.sum(likelihood.fitted_with_certainty(y, eta) & (w > 0)))

    def rows_in_memory(self, y, w):
        """X, y and w as arrays in memory (None from designs that do not hold them)."""
        return self.X, y, w

    def pass_threads(self):
        """Context of a fit's passes: BLAS held at one thread, workers replace it."""
        return passes_own_threads()

    def linear_predictor(self, theta, X=None):
        """eta for every row: shape (n,) when q == 1, else (n, q)."""
        X = self.X if X is None else X
        W, b = self.split(theta)
        if self.q == 1:
            return X @ W[0] + b[0]
        return X @ W.T + b

    # -- one pass: loss and gradient --------------------------------------
    def loss_grad(self, likelihood, y, w, theta):
        """Loss sum, gradient and linear predictor at ``theta``: no Hessian.

        The pass of the solver's metric phase (``_fit.newton``): each block of X
        is read once for its predictor and reused from cache for the
        gradient, in tasks over row spans as in the binary Hessian pass.

        Parameters
        ----------
        likelihood : object with ``loss_grad(y, eta, w)``
            Optional attributes: ``work_per_row`` (flops a row of the
            likelihood costs, to decide whether the pass is threaded),
            ``wants_rows`` (then it is called as ``loss_grad(y, eta, w,
            rows=(start, stop))`` with the span's row range) and, for one
            output, ``gradient_span(X, coef, b0, y, w, eta)``, a pass
            over a whole span of rows that replaces the blocks when the pass
            runs on the worker threads.
        y, w : ndarray of shape (n,)
        theta : ndarray of shape (p_full,)

        Returns
        -------
        loss : float
        grad : ndarray (p_full,)
        eta : ndarray of shape (n,) or (n, q)
        """
        W, b = self.split(theta)
        eta = np.empty(self.n) if self.q == 1 else np.empty((self.n, self.q))
        rows = min(self.block_rows, self.n)
        spans = row_spans(self.n, rows)
        work = self.n * (4.0 * self.p_full + getattr(likelihood, "work_per_row", 0.0))
        threaded = worker_count(len(spans), work) > 1
        tasks = [(likelihood, y, w, W, b, eta, a, z, rows, threaded) for a, z in spans]
        parts = map_tasks(self._gradient_task, tasks, work=work)
        loss = 0.0
        gW = np.zeros((self.q, self.d))
        gb = np.zeros(self.q)
        for lb, gw, gi in parts:
            loss += lb
            gW += gw
            gb += gi
        return loss, self.layout.join(gW, gb), eta

    def _gradient_task(self, likelihood, y, w, W, b, eta, first, last, rows, threaded):
        """Loss, coefficient gradient (q, d) and intercept gradient (q,) of rows [first, last)."""
        binary = self.q == 1
        span_pass = getattr(likelihood, "gradient_span", None)
        if threaded and binary and span_pass is not None and self.X.flags.c_contiguous:
            loss, gx, gb = span_pass(
                np.asarray(self.X[first:last]),
                W[0],
                b[0] if self.fit_intercept else 0.0,
                y[first:last],
                w[first:last],
                eta[first:last],
            )
            return loss, gx[None, :], np.array([gb])
        wants_rows = getattr(likelihood, "wants_rows", False)
        gW = np.zeros((self.q, self.d))
        gb = np.zeros(self.q)
        loss = 0.0
        for start in range(first, last, rows):
            stop = min(start + rows, last)
            Xb = self.X[start:stop]
            eb = eta[start:stop]
            if binary:
                np.matmul(Xb, W[0], out=eb)
            else:
                np.matmul(Xb, W.T, out=eb)
            if self.fit_intercept:
                eb += b if not binary else b[0]
            if wants_rows:
                lb, g = likelihood.loss_grad(y[start:stop], eb, w[start:stop], rows=(start, stop))
            else:
                lb, g = likelihood.loss_grad(y[start:stop], eb, w[start:stop])
            loss += lb
            if binary:
                gW[0] += np.dot(Xb.T, g)
                gb[0] += float(np.sum(g))
            else:
                gW += np.dot(g.T, Xb)
                gb += g.sum(axis=0)
        return loss, gW, gb

    # -- one pass: loss, gradient, Hessian --------------------------------
    def loss_grad_hess(self, likelihood, y, w, theta, eta=None):
        """Loss sum, gradient and Hessian at ``theta``, and the predictor.

        When ``eta`` is None the linear predictor is computed block by block
        inside the pass, so each block of X is read from memory once and
        then reused from cache for the gradient and the Hessian.

        Parameters
        ----------
        likelihood : object with ``derivatives(y, eta, w)``
        y, w : ndarray of shape (n,)
        theta : ndarray of shape (p_full,)
        eta : ndarray of shape (n,) or (n, q), optional
            The linear predictor at ``theta``, when the caller has it.

        Returns
        -------
        loss : float
        grad : ndarray (p_full,)
        hess : ndarray (p_full, p_full)
        eta : ndarray of shape (n,) or (n, q)
        """
        if self.q == 1:
            return self._loss_grad_hess_binary(likelihood, y, w, theta, eta)
        W, b = self.split(theta)
        fill = eta is None
        if fill:
            eta = np.empty((self.n, self.q))
        rows = min(self.block_rows, self.n)
        spans = row_spans(self.n, rows)
        tasks = [(self, likelihood, y, w, W, b, eta, fill, a, z, rows) for a, z in spans]
        loss, grad, packed = map_tasks(
            _multiclass_task, tasks, fold=_add_parts, work=float(self.n) * self.p_full**2 / 2
        )
        return loss, grad, unpack_hessian(self.layout, packed), eta

    def _loss_grad_hess_binary(self, likelihood, y, w, theta, eta):
        """The q == 1 pass: one symmetric product per block gives the whole Hessian.

        h >= 0 for log-concave likelihoods, so with s = sqrt(h) the block
        A = [s * X_b, s] (the intercept column is s itself) has
        A^T A = [[X_b^T diag(h) X_b, X_b^T h], [h^T X_b, sum h]]: slopes,
        slope-intercept and intercept entries from one BLAS call (numpy's
        ``np.dot(A.T, A)``, which it runs as a symmetric rank-k update with
        the GIL released). Products on worker threads go through ``np.dot``,
        not ``@``: numpy 2.4's matmul keeps the GIL when the result has fewer
        than about 500 entries, which is every Hessian up to d = 21 and every
        gradient, so two threads ran them one after the other. scipy's
        ``dsyrk`` wrapper holds the GIL too, and its orientation was slower
        (figures in benchmarks/README.md). A is one block-sized buffer per
        task, never a copy of X. Tasks of consecutive blocks (``row_spans``)
        run on worker threads (see ``map_tasks``) and are summed in row
        order.
        """
        d, p = self.d, self.p_full
        W, b = self.split(theta)
        coef, b0 = W[0], float(b[0])
        fill = eta is None
        if fill:
            eta = np.empty(self.n)
        rows = min(self.block_rows, self.n)
        tasks = [
            (likelihood, y, w, coef, b0, eta, fill, a, z, rows) for a, z in row_spans(self.n, rows)
        ]
        parts = map_tasks(self._binary_task, tasks, work=float(self.n) * self.p_full**2)
        loss = 0.0
        grad = np.zeros(p)
        hess = np.zeros((p, p))
        for lb, gx, gb, hb in parts:
            loss += lb
            grad[:d] += gx
            if self.fit_intercept:
                grad[d] += gb
            hess += hb
        # numpy's symmetric update mirrors one triangle; should it ever fall
        # back to a general product, this keeps the Hessian exactly symmetric
        # (upper triangle copied down; index arrays, not np.triu, which cost
        # as much as the solve on small models).
        lower = _lower_indices(p)
        hess[lower] = hess.T[lower]
        return loss, grad, hess, eta

    def _binary_task(self, likelihood, y, w, coef, b0, eta, fill, first, last, rows):
        """Loss, slope gradient, intercept gradient and upper Hessian of rows [first, last)."""
        d, p = self.d, self.p_full
        buf = np.empty((min(rows, last - first), p))
        s = np.empty(len(buf))
        gx = np.zeros(d)
        gb = 0.0
        hess = np.zeros((p, p))
        product = np.empty((p, p))
        loss = 0.0
        for start in range(first, last, rows):
            stop = min(start + rows, last)
            m = stop - start
            Xb = self.X[start:stop]
            eb = eta[start:stop]
            if fill:
                np.matmul(Xb, coef, out=eb)
                if b0 != 0.0:
                    eb += b0
            lb, g, h = likelihood.derivatives(y[start:stop], eb, w[start:stop])
            loss += lb
            gx += np.dot(Xb.T, g)
            sb = np.sqrt(h, out=s[:m])
            A = buf[:m]
            np.multiply(Xb, sb[:, None], out=A[:, :d])
            if self.fit_intercept:
                gb += float(np.sum(g))
                A[:, d] = sb
            hess += np.dot(A.T, A, out=product)
        return loss, gx, gb, hess


def _multiclass_task(design, likelihood, y, w, W, b, eta, fill, first, last, rows):
    """Loss, gradient and packed Hessian sums of rows [first, last), q > 1.

    The softmax Hessian is ``sum_i h_i (x) x_i x_i^T`` with ``h_i`` the
    K x K matrix ``w_i (diag p_i - p_i p_i^T)`` and ``x_i`` the row with
    a trailing 1 when there is an intercept.  Its distinct entries are
    ``G[(k, l), (a, b)] = sum_i h_i[k, l] x_ia x_ib`` over k <= l and
    a <= b: one GEMM of the rows' packed ``h`` (n x K(K+1)/2, as the
    likelihood returns it) with their packed outer products (n x
    d(d+1)/2), per sub-block of rows that stays in cache.  That is half
    the multiply-adds of a product per class pair and a far better shape
    for BLAS than K(K+1)/2 products with d x d outputs (figures in
    benchmarks/README.md). Every entry is still a sum of products of exact
    factors, with no difference of two large terms. :func:`unpack_hessian`
    expands G.
    """
    d = design.d
    dx = d + 1 if design.fit_intercept else d
    n_outer = dx * (dx + 1) // 2
    packed = np.zeros((likelihood.pairs[0].size, n_outer))
    grad = np.zeros(design.p_full)
    # The sub-block's rows go down the columns, so that every pair's
    # products are one contiguous row of outer_t (``pack_outer``).
    sub = max(16, _OUTER_BYTES // (8 * n_outer))
    outer_t = np.empty((n_outer, sub))
    x_t = np.ones((dx, sub))
    loss = 0.0
    slopes, intercepts = design.layout.slopes(grad), design.layout.intercepts(grad)
    for start in range(first, last, rows):
        stop = min(start + rows, last)
        Xb = design.X[start:stop]
        if fill:
            np.matmul(Xb, W.T, out=eta[start:stop])
            eta[start:stop] += b
        lb, g, h = likelihood.derivatives(y[start:stop], eta[start:stop], w[start:stop])
        loss += lb
        slopes += np.dot(g.T, Xb).ravel()
        if design.fit_intercept:
            intercepts += g.sum(axis=0)
        for s0 in range(0, stop - start, sub):
            m = min(sub, stop - start - s0)
            x_t[:d, :m] = Xb[s0 : s0 + m].T
            pack_outer(x_t, m, outer_t)
            packed += h[s0 : s0 + m].T @ outer_t[:, :m].T
    return loss, grad, packed


def unpack_hessian(layout, packed):
    """The full symmetric (p_full, p_full) Hessian from the packed sums.

    Entry (j, t) of ``packed``, class pair (k, l) and column pair (a, b), is
    H[(k, a), (l, b)] and, by the symmetry of each row's outer product and
    of H, also H[(k, b), (l, a)], H[(l, b), (k, a)] and H[(l, a), (k, b)]:
    four scatters of the whole array, through flat positions computed once
    per layout (far faster than a loop over the class pairs).
    """
    p = layout.p_full
    hess = np.empty((p, p))
    flat = hess.reshape(-1)
    values = packed.reshape(-1)
    for positions in _packed_positions(layout.q, layout.d, layout.fit_intercept):
        flat[positions] = values
    return hess


@functools.lru_cache(maxsize=16)
def _packed_positions(q, d, fit_intercept):
    """Flat positions in H of the packed entries, the four symmetric copies."""
    layout = ParameterLayout(q, d, fit_intercept)
    dx = d + 1 if fit_intercept else d
    ku, lu = np.triu_indices(q)
    au, bu = np.triu_indices(dx)

    def param(k, a):
        return layout.index(k[:, None], a[None, :])

    p = layout.p_full
    ka, lb, kb, la = param(ku, au), param(lu, bu), param(ku, bu), param(lu, au)
    return [(r * p + c).reshape(-1) for r, c in ((ka, lb), (kb, la), (lb, ka), (la, kb))]


def _add_parts(acc, part):
    """Sum (loss, grad, hess) task results, in place in ``acc``'s arrays."""
    acc[1][:] += part[1]
    acc[2][:] += part[2]
    return acc[0] + part[0], acc[1], acc[2]
