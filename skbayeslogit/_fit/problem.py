"""One MAP problem for the Newton solver: data, likelihood, prior and free map."""

import numpy as np

from .._linear.design import LinearDesign
from .observed import observed_loss_grad_hess


def _free_map_blocks(T):
    """T as unit columns, then a dense block: ``(lead, tail, B)``, or None.

    The free maps of ``ParameterLayout.free_map`` select parameters (the
    columns of T are unit vectors at rows ``lead``) and, for zero-sum
    intercepts, add a small basis ``B`` on the remaining rows ``tail``. Then
    T^T H T has the blocks H[lead, lead], H[lead, tail] B and
    B^T H[tail, tail] B, the first copied exactly.
    """
    n_unit = 0
    for column in T.T:
        nonzero = np.flatnonzero(column)
        if nonzero.size != 1 or column[nonzero[0]] != 1.0:
            break
        n_unit += 1
    lead = np.argmax(T[:, :n_unit], axis=0) if n_unit else np.zeros(0, dtype=np.intp)
    tail = np.setdiff1d(np.arange(T.shape[0]), lead)
    B = T[tail, n_unit:]
    rebuilt = np.zeros_like(T)
    rebuilt[lead, np.arange(n_unit)] = 1.0
    rebuilt[tail, n_unit:] = B
    return (lead, tail, B) if np.array_equal(rebuilt, T) else None


class NewtonProblem:
    """One MAP problem: data, likelihood, prior and free-parameter map.

    Parameters
    ----------
    design : LinearDesign
    likelihood : object
        See ``likelihoods``.
    y, w : ndarray of shape (n,)
        Encoded targets and non-negative row weights.
    prior_precision : ndarray of shape (p_full,)
        Diagonal of D.
    free_map : ndarray of shape (p_full, p_free) or None
        T; None means the identity.
    """

    def __init__(self, design, likelihood, y, w, prior_precision, free_map=None):
        self.design = design
        self.likelihood = likelihood
        self.y = y
        self.w = w
        self.prior_precision = np.asarray(prior_precision, dtype=np.float64)
        self.free_map = free_map
        self.observed = False  # see with_observed
        self.p_free = design.p_full if free_map is None else free_map.shape[1]
        self._free_blocks = None if free_map is None else _free_map_blocks(free_map)

    def to_full(self, phi):
        return phi if self.free_map is None else self.free_map @ phi

    def to_free_grad(self, g):
        return g if self.free_map is None else self.free_map.T @ g

    def to_free_hess(self, H):
        if self.free_map is None:
            return H
        if self._free_blocks is None:
            T = self.free_map
            return T.T @ H @ T
        # T^T H T by blocks: gathers instead of two dense p^3 products,
        # which cost a large share of a pass for wide multiclass models.
        lead, tail, B = self._free_blocks
        H_lead = H[np.ix_(lead, lead)]
        if B.shape[1] == 0:
            return H_lead
        H_cross = H[np.ix_(lead, tail)] @ B
        H_tail = B.T @ H[np.ix_(tail, tail)] @ B
        return np.block([[H_lead, H_cross], [H_cross.T, H_tail]])

    def penalty(self, theta):
        return 0.5 * float(theta @ (self.prior_precision * theta))

    def with_likelihood(self, likelihood):
        """The same data, prior and free map with another likelihood."""
        return NewtonProblem(
            self.design, likelihood, self.y, self.w, self.prior_precision, self.free_map
        )

    def with_observed(self):
        """The same problem whose ``derivatives`` use the likelihood's observed Hessian.

        For likelihoods that are not log-concave (module ``observed``): their
        ``derivatives`` give a curvature to climb with, not the Hessian.
        """
        problem = self.with_likelihood(self.likelihood)
        problem.observed = True
        return problem

    def derivatives(self, phi, eta=None):
        """E, its gradient and Hessian in free coordinates, the NLL part, eta.

        ``eta`` (the linear predictor at ``phi``) is computed inside the
        data pass when not given.
        """
        theta = self.to_full(phi)
        if self.observed:
            loss, g, H, eta = observed_loss_grad_hess(
                self.design, self.likelihood, self.y, self.w, theta, eta
            )
        else:
            loss, g, H, eta = self.design.loss_grad_hess(
                self.likelihood, self.y, self.w, theta, eta
            )
        g = g + self.prior_precision * theta
        H[np.diag_indices_from(H)] += self.prior_precision
        E = loss + self.penalty(theta)
        return E, self.to_free_grad(g), self.to_free_hess(H), loss, eta

    def value_grad(self, phi):
        """E, its gradient in free coordinates, the NLL part and eta: no Hessian."""
        theta = self.to_full(phi)
        loss, g, eta = self.design.loss_grad(self.likelihood, self.y, self.w, theta)
        g = g + self.prior_precision * theta
        return loss + self.penalty(theta), self.to_free_grad(g), loss, eta

    def subsample(self, n_rows, seed=0):
        """The same problem on ``n_rows`` random rows, weights rescaled.

        The weights are scaled so that they sum to the full total, which
        keeps the balance between likelihood and prior as in the full data.
        """
        rng = np.random.default_rng(seed)
        idx = np.sort(rng.choice(self.design.n, size=n_rows, replace=False))
        X_sub, y_sub, w_sub = self.design.take(idx, self.y, self.w)
        total = w_sub.sum()
        if total <= 0:
            return None
        w_sub = w_sub * (self.design.weight_total(self.w) / total)
        design = LinearDesign(X_sub, self.design.q, self.design.fit_intercept)
        return NewtonProblem(
            design, self.likelihood, y_sub, w_sub, self.prior_precision, self.free_map
        )
