"""Where each parameter sits in the parameter vector, asked in one place.

The "full" vector has length ``q * d + q`` with an intercept and ``q * d``
without: the q coefficient rows one after the other, then the q intercepts.
``q`` is 1 for a binary model and K for a K-class softmax model. Estimators,
designs, the posterior and the tables all read the vector through a
:class:`ParameterLayout`, so the slicing is written once.
"""

import numpy as np
import pandas as pd


class ParameterLayout:
    """The (outputs, features, intercept) layout of a parameter vector.

    Parameters
    ----------
    n_outputs : int
        q, the number of linear predictors per row (1 or K).
    n_features : int
        d, the number of feature columns.
    fit_intercept : bool
    """

    def __init__(self, n_outputs, n_features, fit_intercept):
        self.q = int(n_outputs)
        self.d = int(n_features)
        self.fit_intercept = bool(fit_intercept)
        self.n_coef = self.q * self.d
        self.p_full = self.n_coef + (self.q if self.fit_intercept else 0)

    @classmethod
    def of_estimator(cls, estimator):
        """The layout of a fitted estimator's ``coef_`` and ``fit_intercept``."""
        q, d = estimator.coef_.shape
        return cls(q, d, estimator.fit_intercept)

    def __eq__(self, other):
        return isinstance(other, ParameterLayout) and (
            (self.q, self.d, self.fit_intercept) == (other.q, other.d, other.fit_intercept)
        )

    def __repr__(self):
        return f"ParameterLayout(q={self.q}, d={self.d}, fit_intercept={self.fit_intercept})"

    # -- the vector ----------------------------------------------------------
    def split(self, theta):
        """Coefficients (q, d) and intercepts (q,) of a full vector (views where possible)."""
        W = theta[: self.n_coef].reshape(self.q, self.d)
        b = theta[self.n_coef :] if self.fit_intercept else np.zeros(self.q)
        return W, b

    def join(self, W, b=None):
        """The full vector of coefficients (q, d) and intercepts (q,)."""
        theta = np.empty(self.p_full)
        theta[: self.n_coef] = np.asarray(W, dtype=np.float64).reshape(-1)
        if self.fit_intercept:
            theta[self.n_coef :] = 0.0 if b is None else b
        return theta

    def slopes(self, theta):
        """The coefficient part of a full vector (or of its leading axis)."""
        return theta[..., : self.n_coef]

    def intercepts(self, theta):
        """The intercept part of a full vector (empty without an intercept)."""
        return theta[..., self.n_coef :]

    def index(self, k, a):
        """Index in the full vector of (class k, column a); column d is the intercept.

        ``k`` and ``a`` are integer arrays that broadcast together.
        """
        return np.where(a < self.d, k * self.d + a, self.n_coef + k)

    # -- names -----------------------------------------------------------------
    def names(self, feature_names, class_names):
        """pandas index of the full vector: feature names, then "intercept".

        Binary: a flat Index named "parameter". Multiclass: a (class,
        parameter) MultiIndex.
        """
        feats = [str(f) for f in feature_names]
        if self.q == 1:
            return pd.Index(
                feats + (["intercept"] if self.fit_intercept else []), name="parameter"
            )
        classes = [str(c) for c in class_names]
        tuples = [(c, f) for c in classes for f in feats]
        if self.fit_intercept:
            tuples += [(c, "intercept") for c in classes]
        return pd.MultiIndex.from_tuples(tuples, names=["class", "parameter"])

    # -- priors and identification ---------------------------------------------
    def prior_precision(self, slope_scale, intercept_scale=None):
        """Diagonal Gaussian prior precision of the full vector (0 = flat)."""
        prec = np.zeros(self.p_full)
        if slope_scale is not None:
            prec[: self.n_coef] = 1.0 / slope_scale**2
        if self.fit_intercept and intercept_scale is not None:
            prec[self.n_coef :] = 1.0 / intercept_scale**2
        return prec

    def free_map(self, slope_prior, intercept_prior):
        """T with full = T @ free, or None for the identity.

        Parameters
        ----------
        slope_prior, intercept_prior : bool
            Whether the slopes / the intercepts have a proper prior.

        Returns
        -------
        ndarray of shape (p_full, p_free) or None

        Notes
        -----
        - Binary: identity.
        - Multiclass with a slope prior and a flat intercept prior: the K
          intercepts are constrained to sum to zero (the likelihood cannot
          see their common shift and a flat prior does not fix it).
        - Multiclass without a slope prior: the first class is the reference
          (its coefficients and intercept are fixed at 0), as in the
          classical multinomial logit.
        """
        q, nc = self.q, self.n_coef
        if q == 1:
            return None
        if not slope_prior:
            return np.eye(self.p_full)[:, self.free_mask()]
        if self.fit_intercept and not intercept_prior:
            T = np.zeros((self.p_full, nc + q - 1))
            T[:nc, :nc] = np.eye(nc)
            T[nc:, nc:] = zero_sum_basis(q)
            return T
        return None

    def free_mask(self):
        """Which full parameters stay free when the first class is the reference."""
        mask = np.ones(self.p_full, dtype=bool)
        if self.q > 1:
            mask[: self.d] = False
            if self.fit_intercept:
                mask[self.n_coef] = False
        return mask


def as_layout(obj):
    """``obj`` if it is a :class:`ParameterLayout`, else the layout it carries (a design's)."""
    return obj if isinstance(obj, ParameterLayout) else obj.layout


def zero_sum_basis(K):
    """Orthonormal basis (K, K-1) of vectors whose entries sum to zero."""
    # Q from the QR of the centring matrix's first K-1 columns spans that space.
    centred = np.eye(K) - 1.0 / K
    Q, _ = np.linalg.qr(centred[:, : K - 1])
    return Q
