"""Parameters of centred, unit-spread columns, and the weighted column moments they need."""

import numpy as np

# Bytes of X centred and squared at a time by weighted_column_moments.
_BLOCK_BYTES = 1 << 20


def weighted_column_moments(X, w, centred=True):
    """Weighted column means and sds of an in-memory X.

    Parameters
    ----------
    X : ndarray of shape (n, d)
        Never written to.
    w : ndarray of shape (n,)
        Non-negative weights with a positive sum.
    centred : bool, default=True
        False: zero centres, and the root mean square as the spread.

    Returns
    -------
    centre, spread : ndarray of shape (d,)
        As ``SourceDesign.column_moments`` gives them for out-of-core data.
    """
    d = X.shape[1]
    total = float(w.sum())
    centre = (w @ X) / total if centred else np.zeros(d)
    # Blocks of rows: no temporary the size of X (np.average makes two).
    square = np.zeros(d)
    rows = max(1, _BLOCK_BYTES // (8 * max(d, 1)))
    for start in range(0, X.shape[0], rows):
        block = X[start : start + rows] - centre
        np.square(block, out=block)
        square += w[start : start + rows] @ block
    return centre, np.sqrt(square / total)


class ColumnScaling:
    """Map between theta and the parameters u of centred, unit-spread columns.

    With column centres m_j and spreads s_j (weighted mean and sd; without
    an intercept no centring, and s_j the weighted root mean square), the
    linear predictor sum_j x_j theta_kj + b_k equals
    sum_j (x_j - m_j) / s_j u_kj + c_k for u_kj = s_j theta_kj and
    c_k = b_k + sum_j m_j theta_kj. A column with zero spread keeps s_j = 1.

    Parameters
    ----------
    centre, spread : ndarray of shape (d,)
        Column centres (zeros without an intercept) and spreads.
    layout : ParameterLayout
        Where the slopes and intercepts sit in theta (and in u).
    """

    def __init__(self, centre, spread, layout):
        self.layout = layout
        self.centre = centre
        self.spread = np.where(spread > 0, spread, 1.0)

    def to_theta(self, u):
        """theta of the scaled parameters u."""
        Wu, c = self.layout.split(u)
        W = Wu / self.spread
        return self.layout.join(W, c - W @ self.centre)

    def to_u(self, theta):
        """The scaled parameters u of theta."""
        W, b = self.layout.split(theta)
        return self.layout.join(W * self.spread, b + W @ self.centre)

    def gradient_to_u(self, grad):
        """Chain rule: the gradient in theta mapped to the gradient in u."""
        gW, gb = self.layout.split(grad)
        if self.layout.fit_intercept:
            gW = gW - np.outer(gb, self.centre)
        return self.layout.join(gW / self.spread, gb)
