"""The Cholesky factor and solve of the Newton step, by LAPACK directly.

``dpotrf`` / ``dpotrs`` are called through ``scipy.linalg.lapack``: scipy's
``cholesky`` and ``cho_solve`` wrappers spend as long on argument handling
as a whole data pass takes on small data, and a fit makes one factor and one
or two solves per iteration (figures in benchmarks/README.md).
"""

import numpy as np
from scipy.linalg import LinAlgError, lapack


def factor(H):
    """Lower Cholesky factor of H (upper triangle zero), or None if H is not
    numerically positive definite."""
    L, info = lapack.dpotrf(H, lower=1, clean=1)
    if info < 0:  # pragma: no cover - an argument error would be ours
        raise ValueError(f"dpotrf: illegal argument {-info}")
    # OpenBLAS's potrf tests a pivot with ``<= 0`` only, so a NaN passes
    # it; a NaN or inf anywhere in the lower triangle reaches the diagonal.
    if info != 0 or not np.all(np.isfinite(np.diagonal(L))):
        return None
    return L


def chol_solve(L, b):
    """Solve (L L^T) x = b for the lower factor ``L`` of :func:`factor`."""
    x, info = lapack.dpotrs(L, b, lower=1)
    if info != 0:  # pragma: no cover - an argument error would be ours
        raise ValueError(f"dpotrs: illegal argument {-info}")
    return x


def robust_cholesky(H):
    """Lower Cholesky factor of H, adding the smallest diagonal jitter needed.

    Returns
    -------
    L : ndarray
    jitter : float
        The diagonal added (0.0 when none was needed).
    """
    H = np.asarray(H, dtype=np.float64)
    if not np.all(np.isfinite(H)):
        raise LinAlgError("the Hessian contains NaN or infinity")
    L = factor(H)
    if L is not None:
        return L, 0.0
    scale = max(float(np.mean(np.abs(np.diag(H)))), 1e-300)
    jitter = 1e-12 * scale
    while jitter < 1e6 * scale:
        L = factor(H + jitter * np.eye(len(H)))
        if L is not None:
            return L, jitter
        jitter *= 10.0
    raise LinAlgError("the Hessian is not positive definite even after regularisation")
