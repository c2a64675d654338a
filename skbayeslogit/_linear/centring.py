"""Internal centring of columns whose offset dwarfs their spread.

A column such as 1e8 + N(0, 1) makes the Hessian of the MAP problem
ill-conditioned (its condition number grows as (offset / spread)^2): the
slope's gradient is a difference of sums near 1e8 times the residuals,
Newton stops on rounding, and the fit comes back wrong without a word.
Fitting on ``X - m`` instead is the same model in other coordinates,

    eta = (x - m) b + a'  with  a = a' - m b,

so the slopes (and their prior) are those of the columns as given, and
only the intercept moves. With a flat intercept prior the map
``theta = A theta_centred`` is exact for the MAP, the posterior (the
Gaussian in the new coordinates is pushed through the linear map) and the
Laplace evidence (``det A = 1``). A proper intercept prior is a prior on
``a``, which in the centred coordinates couples the intercept with every
slope; rather than fit a different model, the fit refuses (see
:func:`centre_columns`).
"""

import numpy as np

from .columns import column_moments
from .design import LinearDesign
from .sources import dense_matrix

#: A column is centred when |mean| exceeds this many standard deviations:
#: the Hessian's condition number then grows past ~1e4 from the offset alone.
CENTRE_RATIO = 1e2


def offset_columns(X):
    """Column means and the mask of columns whose |mean| > ``CENTRE_RATIO`` sd (sd > 0)."""
    return _offset_mask(*column_moments(X))


def _offset_mask(mean, sd):
    return mean, (sd > 0) & (np.abs(mean) > CENTRE_RATIO * sd)


def centre_columns(design, intercept_scale, names):
    """A centred copy of a dense design, and the map back, or the design as it is.

    Parameters
    ----------
    design : DesignBase
        A design with an intercept: in memory it is copied centred; a
        memory-mapped or dask one (``SourceDesign``) subtracts the means
        from every block it reads, the means coming from the validation
        pass's column moments (weighted; any centre is exact, see above),
        so the data are not read an extra time. Without an intercept, a
        shift of a column is not absorbed by anything, and the problem is
        left as posed.
    intercept_scale : float or None
        The intercept's prior sd (None: flat).
    names : callable
        ``names()`` gives the feature names, for the error message.

    Returns
    -------
    design : DesignBase
    A : ndarray of shape (p_full, p_full) or None
        ``theta = A theta_centred``; None when nothing was centred.

    Raises
    ------
    ValueError
        When a column needs centring and the intercept's prior is proper.
    """
    if not design.fit_intercept or not design.d:
        return design, None
    X = dense_matrix(design)
    mean, shifted = offset_columns(X) if X is not None else _offset_mask(*design.column_moments())
    if not np.any(shifted):
        return design, None
    if intercept_scale is not None:
        j = int(np.flatnonzero(shifted)[0])
        raise ValueError(
            f"feature column {names()[j]!r} has an offset {mean[j]:.3g} over "
            f"{CENTRE_RATIO:.0e} times its spread; with a proper intercept_prior_scale the fit "
            "cannot centre it exactly. Centre the column first, or set "
            "intercept_prior_scale=None."
        )
    m = np.where(shifted, mean, 0.0)
    if X is None:
        centred = design.centred(m)
    else:
        centred = LinearDesign(np.ascontiguousarray(X - m), design.q, True)
    layout = design.layout
    A = np.eye(layout.p_full)
    cols = np.arange(layout.d)
    for k in range(layout.q):
        A[layout.index(k, layout.d), layout.index(k, cols)] = -m
    return centred, A


def map_back(A, theta, free_map):
    """The full vector and the free map in the original coordinates.

    ``theta = A theta_centred`` and ``full = A T phi``: the free parameters,
    and so the posterior precision's factor, are unchanged. ``A`` None: as is.
    """
    if A is None:
        return theta, free_map
    return A @ theta, A if free_map is None else A @ free_map
