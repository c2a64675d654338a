"""The Gaussian (Laplace) posterior over the parameters of a linear model.

The posterior is N(m, Sigma) in the free coordinates phi with precision
H = L L^T (L lower triangular, the Cholesky factor kept from the Newton
solve); the full parameters are theta = T phi. Nothing here forms H^{-1} in
a loop: the matrix R = L^{-1} T^T (p_free, p_full) is computed once, and
Sigma_full = R^T R, draws are theta = m + R^T z, and the latent predictors'
moments follow from R (see ``latent_moments``).

Reference for the approximation: Laplace's method as applied to Bayesian
logistic regression in MacKay, "The evidence framework applied to
classification networks", Neural Computation 4 (1992) 720-736, and Bishop,
Pattern Recognition and Machine Learning (2006), Sec. 4.4-4.5.
"""

import numpy as np
import pandas as pd
from scipy.linalg import solve_triangular
from scipy.stats import norm

from .._linear.layout import as_layout
from .._linear.threads import map_tasks, row_spans

# Multiclass moments: rows per piece (its outer products, 66 x 2048 doubles
# at d = 10, and the K x K covariances stay in L2).
_MULTI_ROWS = 2048
# Binary moments: rows per piece finished by the caller's ``chunk`` (its
# moments, 128 KiB each, are still in L2).
_FINISH_ROWS = 16384
# ... and at least this many (a piece's fixed costs stay small).
_MIN_PIECE_ROWS = 4096


class GaussianPosterior:
    """N(mean, R^T R) over the full parameter vector.

    Parameters
    ----------
    mean : ndarray of shape (p_full,)
    chol : ndarray of shape (p_free, p_free)
        Lower Cholesky factor of the precision in free coordinates.
    free_map : ndarray of shape (p_full, p_free) or None
    """

    def __init__(self, mean, chol, free_map=None):
        self.mean = np.asarray(mean, dtype=np.float64)
        self.chol = chol
        p_full = len(self.mean)
        T_t = np.eye(p_full) if free_map is None else free_map.T
        # R = L^{-1} T^T; a triangular solve, once.
        self.R = solve_triangular(chol, T_t, lower=True, check_finite=False)

    def __getstate__(self):
        # The moment plan is a cache rebuilt on the next prediction; a saved
        # model holds only the posterior itself.
        state = self.__dict__.copy()
        state.pop("_moment_plan", None)
        return state

    @property
    def cov(self):
        """Covariance of the full parameters, (p_full, p_full)."""
        return self.R.T @ self.R

    @property
    def sd(self):
        """Marginal posterior standard deviations, (p_full,)."""
        return np.sqrt(np.einsum("ij,ij->j", self.R, self.R))

    def log_det_precision(self):
        """log det H in free coordinates, from the Cholesky diagonal."""
        return 2.0 * float(np.sum(np.log(np.diag(self.chol))))

    def sample(self, n_draws, rng):
        """Draws of the full parameter vector, shape (n_draws, p_full)."""
        z = rng.standard_normal((n_draws, self.R.shape[0]))
        return self.mean + z @ self.R

    def latent_moments(self, layout, X, chunk=None):
        """Mean and (co)variance of eta = x^T W^T + b for each row of X.

        Parameters
        ----------
        layout : ParameterLayout
            The parameter layout (q, d, intercept); a design stands for the
            layout it carries.
        X : ndarray of shape (n, d)
        chunk : callable, optional
            Binary only: ``chunk(mean_c, var_c, start, stop)`` is called on
            each piece's moments as soon as they are computed, while they
            are in cache (see :meth:`binary_moments`).

        Returns
        -------
        mean : ndarray of shape (n,) if q == 1 else (n, q)
        var : ndarray of shape (n,) if q == 1 else (n, q, q)
            Variance (binary) or covariance matrix (multiclass) per row.
        """
        layout = as_layout(layout)
        if layout.q == 1:
            mean, var, _ = self.binary_moments(layout, X, chunk=chunk)
            return mean, var
        n, q = X.shape[0], layout.q
        mean = np.empty((n, q))
        var = np.empty((n, q, q))

        ku, lu = np.triu_indices(q)

        def keep(mean_c, pairs_c, start, stop):
            mean[start:stop] = mean_c
            var[start:stop, ku, lu] = pairs_c
            var[start:stop, lu, ku] = pairs_c

        self.multiclass_moments(layout, X, keep)
        return mean, var

    def multiclass_moments(self, layout, X, chunk):
        """q > 1: latent means and covariances, piece by piece.

        Cov(eta_k, eta_l) at x~ is x~^T S_kl x~ with S_kl the (k, l) block
        of the covariance; summed over a <= b it is one product of the row's
        packed outer products x~_a x~_b (``pack_outer``) with a fixed
        (n_outer, K(K+1)/2) matrix, so a piece of rows takes one GEMM instead
        of K products of X with R's blocks and K(K+1)/2 row-wise sums.

        Parameters
        ----------
        layout : ParameterLayout
        X : ndarray of shape (n, d), float64, C order
        chunk : callable
            ``chunk(mean_c, pairs_c, start, stop)`` with ``mean_c`` (m, K)
            and ``pairs_c`` (m, K(K+1)/2), the covariances Cov(eta_k, eta_l)
            for k <= l in ``np.triu_indices(K)`` order, of rows [start,
            stop); called from worker threads on disjoint ranges.
        """
        from .._kernels.softmax import pack_outer

        layout = as_layout(layout)
        d = layout.d
        dx = d + 1 if layout.fit_intercept else d
        weights = self._pair_weights(layout)
        W, b = layout.split(self.mean)
        n = X.shape[0]
        rows = min(_MULTI_ROWS, max(n, 1))

        def task(first, last):
            x_t = np.ones((dx, rows))  # the intercept row stays 1
            outer_t = np.empty((weights.shape[0], rows))
            for start in range(first, last, rows):
                stop = min(start + rows, last)
                m = stop - start
                Xc = X[start:stop]
                x_t[:d, :m] = Xc.T
                pack_outer(x_t, m, outer_t)
                pairs = np.dot(outer_t[:, :m].T, weights)
                chunk(np.dot(Xc, W.T) + b, pairs, start, stop)

        map_tasks(task, row_spans(n, rows), work=float(n) * weights.size)

    def _pair_weights(self, layout):
        """(n_outer, K(K+1)/2): entry ((a, b), (k, l)) weighs x~_a x~_b in Cov(eta_k, eta_l)."""
        cached = getattr(self, "_pair_weight_cache", None)
        if cached is not None:
            return cached
        dx = layout.d + 1 if layout.fit_intercept else layout.d
        S = self.cov
        ku, lu = np.triu_indices(layout.q)
        au, bu = np.triu_indices(dx)
        param = layout.index
        ka, lb = param(ku[None, :], au[:, None]), param(lu[None, :], bu[:, None])
        kb, la = param(ku[None, :], bu[:, None]), param(lu[None, :], au[:, None])
        # a < b: both orders of the pair (S_kl is not symmetric for k != l).
        weights = S[ka, lb] + np.where((au != bu)[:, None], S[kb, la], 0.0)
        self._pair_weight_cache = weights
        return weights

    def binary_moments(self, layout, X, limit=np.inf, chunk=None):
        """q == 1: latent mean and variance of every row, and a range check.

        One compiled pass over X (``_kernels.moments``) gives both moments,
        mean = m^T x~ and var = ||R x~||^2 with x~ = (x, 1) (intercept) or
        x, and checks every entry read: ``|x| <= limit``, NaN failing. Spans
        of rows run on the worker threads; ``chunk`` finishes each
        piece of ``_FINISH_ROWS`` rows there, while its moments are in cache.
        Pieces with a failed check are not passed to ``chunk``.

        Parameters
        ----------
        layout : ParameterLayout
        X : ndarray of shape (n, d), float64, C order
        limit : float, default=inf
            Largest magnitude allowed in X.
        chunk : callable, optional
            ``chunk(mean_c, var_c, start, stop)``; called from worker
            threads, on disjoint row ranges.

        Returns
        -------
        mean, var : ndarray of shape (n,)
        in_range : bool
            False when some entry of X is NaN or beyond ``limit`` (the
            moments are then not to be used).
        """
        from .._kernels.moments import BinaryMomentPlan

        plan = getattr(self, "_moment_plan", None)
        if plan is None:
            # Fixed by the posterior: built on the first prediction.
            plan = self._moment_plan = BinaryMomentPlan(self.R, self.mean, as_layout(layout).d)
        X = np.ascontiguousarray(X, dtype=np.float64)
        n = X.shape[0]
        mean = np.empty(n)
        var = np.empty(n)
        # Each row's moments are its own, so the split is free: at least
        # eight pieces when n allows, so that a worker slowed by other load
        # leaves fewer rows to wait for.
        rows = min(_FINISH_ROWS, max(_MIN_PIECE_ROWS, -(-n // 8)), max(n, 1))

        def task(first, last):
            ok = True
            for start in range(first, last, rows):
                stop = min(start + rows, last)
                if plan.run(X[start:stop], mean[start:stop], var[start:stop], limit):
                    ok = False
                elif chunk is not None:
                    chunk(mean[start:stop], var[start:stop], start, stop)
            return ok

        spans = row_spans(n, rows, span=rows)
        in_range = all(map_tasks(task, spans, work=float(n) * plan.work, blas=False))
        return mean, var, in_range


def summary_table(mean, cov, level, index):
    """Estimate / sd / equal-tailed bounds / sign-probability table of a Gaussian.

    Parameters
    ----------
    mean : ndarray of shape (p,)
    cov : ndarray of shape (p, p)
    level : float in (0, 1)
    index : pandas Index of length p

    Returns
    -------
    pandas.DataFrame
        Columns ``estimate``, ``sd``, ``lower``, ``upper`` and ``sign_prob``
        (Phi(|m| / sd), the posterior probability of the estimate's sign).
    """
    sd = np.sqrt(np.maximum(np.diag(cov), 0.0))
    z = norm.ppf(0.5 + level / 2.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(sd > 0, np.abs(mean) / sd, np.inf)
    return pd.DataFrame(
        {
            "estimate": mean,
            "sd": sd,
            "lower": mean - z * sd,
            "upper": mean + z * sd,
            "sign_prob": norm.cdf(ratio),
        },
        index=index,
    )
