"""Is the maximum-likelihood estimate identified? Separation and collinearity checks.

Run after a fit without a slope prior, where the estimate may not exist
(separated classes) or not be unique (linearly dependent features).
"""

import warnings

import numpy as np

from ..exceptions import CollinearityWarning, SeparationWarning

_SEPARATION_SUBSET_ROWS = 2_000  # rows of the first, small linear program


def binary_separation(X, y, w, fit_intercept, margin=None):
    """True when some direction v separates the classes (weakly).

    The maximum-likelihood estimate of a binary GLM with a monotone link
    fails to exist exactly when a nonzero v has s_i x_i^T v >= 0 for every
    row (s_i = +1 for class 1, -1 for class 0) with at least one strict
    inequality (Albert & Anderson, Biometrika 71, 1984). The linear program
    max sum_i s_i x_i^T v subject to those constraints and |v_j| <= 1 finds
    such a v when its optimum is positive (Konis, "Linear programming
    algorithms for detecting separated data in binary logistic regression
    models", DPhil thesis, Oxford, 2007).

    On large data the linear program over all rows is slow. A subset of
    rows settles most cases first: if the rows with the smallest fitted
    margins ``margin`` (s_i eta_i, shape (n,)) admit no such v and have full
    column rank, then no v != 0 has s_i x_i^T v >= 0 even on them, so none
    does on all rows. Only when the subset is separable (or rank deficient)
    is the full program solved.
    """
    from scipy.optimize import linprog

    keep = w > 0
    A = X[keep]
    if fit_intercept:
        A = np.column_stack([A, np.ones(len(A))])
    scale = np.max(np.abs(A), axis=0)
    A = A / np.where(scale > 0, scale, 1.0)
    S = A * np.where(y[keep] > 0.5, 1.0, -1.0)[:, None]

    def separable(rows):
        res = linprog(
            -rows.sum(axis=0), A_ub=-rows, b_ub=np.zeros(len(rows)), bounds=(-1, 1), method="highs"
        )
        return bool(res.status == 0 and -res.fun > 1e-7 * len(rows))

    if margin is not None and len(S) > 2 * _SEPARATION_SUBSET_ROWS:
        closest = np.argpartition(margin[keep], _SEPARATION_SUBSET_ROWS)[:_SEPARATION_SUBSET_ROWS]
        subset = S[closest]
        if np.linalg.matrix_rank(subset) == S.shape[1] and not separable(subset):
            return False
    return separable(S)


def check_identification(design, likelihood, y, w, result, names):
    """Warn (or raise) when the maximum-likelihood estimate is not identified.

    A recorded label fitted with probability 1 - 1e-12 or closer is what an
    estimate drifting to infinity produces (separation). With the rows in
    memory a binary model confirms it by the linear program of
    :func:`binary_separation`; a design without them (``rows_in_memory``
    None) lets a diverging Newton iteration stand in for it (well-separated
    but identified fits have such rows too), so its warning says "may".

    Parameters
    ----------
    design : a design; y, w : its labels and weights (None when it holds them)
    likelihood : the fit's likelihood
    result : NewtonResult
    names : callable
        ``names()`` lists the free parameters' names, for the collinearity
        message (called only when there is one).
    """
    warn_collinear(result, names)
    perfect = design.count_perfect(likelihood, result.theta, y, w, result.eta)
    if perfect == 0:
        return
    rows = design.rows_in_memory(y, w)
    if rows is None:
        if design.q > 1 or not result.converged:
            _warn_separation(perfect, "may not exist", "likely separation", "may be")
        return
    confirmed = False
    if design.q == 1:
        X, y, w = rows
        margin = np.where(y > 0.5, result.eta, -result.eta)
        confirmed = binary_separation(X, y, w, design.fit_intercept, margin)
    if design.q > 1 or confirmed:
        kind = "complete or quasi-complete separation" if confirmed else "likely separation"
        _warn_separation(perfect, "does not exist", kind, "are", grow=True)


def _warn_separation(perfect, exists, kind, are, grow=False):
    growth = ", and the coefficients grow without bound" if grow else ""
    warnings.warn(
        f"the maximum-likelihood estimate {exists} ({kind}: {perfect} row(s) are fitted "
        f"with probability 1 to within 1e-12{growth}). The reported coefficients and "
        f"intervals {are} meaningless; set prior_scale (a float or 'auto').",
        SeparationWarning,
        stacklevel=4,
    )


def warn_collinear(result, names):
    """Raise or warn when the Hessian at the estimate is (nearly) singular.

    ``names()`` lists the free parameters' names (see ``check_identification``).
    """
    L = result.chol
    H = L @ L.T
    dscale = np.sqrt(np.diag(H))
    Hs = H / np.outer(dscale, dscale)
    eigval, eigvec = np.linalg.eigh(Hs)
    ratio = eigval[0] / eigval[-1]
    if result.jitter == 0.0 and ratio > 1e-10:
        return
    v = np.abs(eigvec[:, 0])
    labels = names()
    involved = [labels[i] for i in np.argsort(-v) if v[i] > 0.1][:6]
    msg = (
        "the features are (nearly) linearly dependent without a prior: the "
        f"Hessian's scaled condition number is {1 / max(ratio, 1e-300):.2g}; "
        f"the dependence involves {', '.join(involved)}. Drop or combine these "
        "columns, or set prior_scale."
    )
    if result.jitter > 0.0 or ratio < 1e-14:
        raise ValueError(msg)
    warnings.warn(msg, CollinearityWarning, stacklevel=4)
