"""Parameters of centred, unit-spread columns: the units the L-BFGS driver works in."""

import numpy as np


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

    @classmethod
    def of_design(cls, design, w=None):
        """The scaling of a design's columns: weighted moments, centred with an intercept.

        Parameters
        ----------
        design : DesignBase
            Asked for ``column_moments(w, centred=fit_intercept)``.
        w : ndarray of shape (n,) or None
            Row weights of a design that does not hold them.
        """
        centre, spread = design.column_moments(w, centred=design.fit_intercept)
        return cls(centre, spread, design.layout)

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
