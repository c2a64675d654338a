"""Damped Newton with a Cholesky solve, for MAP estimation of linear models.

Minimises the penalised objective

    E(phi) = sum_i w_i l(y_i, eta_i(T phi)) + 1/2 (T phi)^T D (T phi)

over the free parameters ``phi``; ``T`` (p_full, p_free) maps them to the
full parameter vector (the identity unless a constraint, such as zero-sum
multiclass intercepts, removes a direction that the likelihood cannot
identify) and ``D`` is the diagonal prior precision (zero for flat priors).

Each iteration makes one blocked pass over the data: it computes the linear
predictor of the trial point block by block and, with that block still in
cache, the loss, gradient and Hessian there. The full Newton step is accepted
in almost every iteration, and then the trial pass is already the next
iteration's; only when the Armijo test fails does the backtracking move along
``eta + alpha * d_eta`` (d_eta = eta_trial - eta) with loss-only passes that
do not touch X. The iteration stops when half the squared Newton
decrement, lambda^2 / 2 = -g^T delta / 2 (the quadratic model's estimate of
E - min E, in nats), falls below ``tol``; the last full step is then taken
and one more complete pass gives the Hessian at the returned point, the
posterior precision.

On large data a MAP on a row subsample (weights rescaled to the full total)
is used as the starting point, so the full data are visited by only the two
or three final, quadratically convergent iterations.

Reference: Boyd & Vandenberghe, Convex Optimization (2004), Sec. 9.5
(Newton's method, Newton decrement, backtracking line search).
"""

import warnings
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, cho_solve, cholesky
from sklearn.exceptions import ConvergenceWarning

from ._design import LinearDesign

_SUBSAMPLE_MIN_ROWS = 200_000  # below this, a warm start does not pay
_SUBSAMPLE_ROWS = 50_000


@dataclass
class NewtonResult:
    """What a MAP fit returns.

    Attributes
    ----------
    phi : ndarray (p_free,)
        Free parameters at the optimum.
    theta : ndarray (p_full,)
        ``T @ phi``.
    chol : ndarray (p_free, p_free)
        Lower Cholesky factor of the Hessian of E at the optimum (the
        posterior precision of the Laplace approximation).
    objective : float
        E at ``phi``.
    loss : float
        The negative log-likelihood part of E.
    eta : ndarray
        Linear predictor at ``phi``.
    n_iter : int
        Newton iterations on the full data.
    converged : bool
    jitter : float
        Diagonal added to the final Hessian to make it positive definite
        (0.0 when none was needed).
    """

    phi: np.ndarray
    theta: np.ndarray
    chol: np.ndarray
    objective: float
    loss: float
    eta: np.ndarray
    n_iter: int
    converged: bool
    jitter: float


def _robust_cholesky(H):
    """Lower Cholesky factor of H, adding the smallest diagonal jitter needed."""
    try:
        return cholesky(H, lower=True, check_finite=False), 0.0
    except LinAlgError:
        pass
    scale = max(float(np.mean(np.abs(np.diag(H)))), 1e-300)
    jitter = 1e-12 * scale
    while jitter < 1e6 * scale:
        try:
            L = cholesky(H + jitter * np.eye(len(H)), lower=True, check_finite=False)
            return L, jitter
        except LinAlgError:
            jitter *= 10.0
    raise LinAlgError("the Hessian is not positive definite even after regularisation")


class NewtonProblem:
    """One MAP problem: data, likelihood, prior and free-parameter map.

    Parameters
    ----------
    design : LinearDesign
    likelihood : object
        See ``_likelihoods``.
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
        self.p_free = design.p_full if free_map is None else free_map.shape[1]

    def to_full(self, phi):
        return phi if self.free_map is None else self.free_map @ phi

    def to_free_grad(self, g):
        return g if self.free_map is None else self.free_map.T @ g

    def to_free_hess(self, H):
        if self.free_map is None:
            return H
        T = self.free_map
        return T.T @ H @ T

    def penalty(self, theta):
        return 0.5 * float(theta @ (self.prior_precision * theta))

    def derivatives(self, phi, eta=None):
        """E, its gradient and Hessian in free coordinates, the NLL part, eta.

        ``eta`` (the linear predictor at ``phi``) is computed inside the
        data pass when not given.
        """
        theta = self.to_full(phi)
        loss, g, H, eta = self.design.loss_grad_hess(self.likelihood, self.y, self.w, theta, eta)
        g = g + self.prior_precision * theta
        H[np.diag_indices_from(H)] += self.prior_precision
        E = loss + self.penalty(theta)
        return E, self.to_free_grad(g), self.to_free_hess(H), loss, eta

    def subsample(self, n_rows, seed=0):
        """The same problem on ``n_rows`` random rows, weights rescaled.

        The weights are scaled so that they sum to the full total, which
        keeps the balance between likelihood and prior as in the full data.
        """
        rng = np.random.default_rng(seed)
        idx = np.sort(rng.choice(self.design.n, size=n_rows, replace=False))
        if getattr(self.design, "out_of_core", False):
            # The same rows as in memory, gathered from the source once.
            X_sub, y_sub, w_sub = self.design.take(idx)
            full_total = self.design.total_weight
        else:
            X_sub = np.ascontiguousarray(self.design.X[idx])
            y_sub, w_sub = self.y[idx], self.w[idx]
            full_total = self.w.sum()
        total = w_sub.sum()
        if total <= 0:
            return None
        w_sub = w_sub * (full_total / total)
        design = LinearDesign(X_sub, self.design.q, self.design.fit_intercept)
        return NewtonProblem(
            design, self.likelihood, y_sub, w_sub, self.prior_precision, self.free_map
        )


def newton_solve(problem, phi0, *, max_iter=100, tol=1e-8, armijo=1e-4):
    """Minimise ``problem``'s objective from ``phi0`` by damped Newton.

    Parameters
    ----------
    problem : NewtonProblem
    phi0 : ndarray of shape (p_free,)
    max_iter : int
        Maximum full-data Newton iterations.
    tol : float
        Stop when lambda^2 / 2 <= tol (nats).
    armijo : float
        Sufficient-decrease constant of the backtracking line search.

    Returns
    -------
    NewtonResult
    """
    lik = problem.likelihood
    phi = np.array(phi0, dtype=np.float64)
    E, g, H, loss, eta = problem.derivatives(phi)
    converged = False
    n_iter = 0
    for n_iter in range(1, max_iter + 1):  # noqa: B007 - n_iter is reported
        L, jitter = _robust_cholesky(H)
        delta = -cho_solve((L, True), g, check_finite=False)
        decrement = -float(np.dot(g, delta))
        if decrement / 2.0 <= tol:
            # Quadratically convergent: the full step lands within about
            # decrement^2 of the optimum. One more complete pass there gives
            # the posterior precision at the returned point itself (the
            # Hessian of this iterate would put the standard errors off by
            # O(sqrt(tol)) relative); it costs little more than the pass
            # for eta alone, since X is read once either way.
            phi = phi + delta
            E, g, H, loss, eta = problem.derivatives(phi)
            L, jitter = _robust_cholesky(H)
            converged = True
            break
        slope = -decrement
        # The full step is tried with the complete pass (it also computes
        # the new linear predictor): it is accepted in almost every
        # iteration, and then that pass is the next iteration's.
        phi_try = phi + delta
        E_try, g_try, H_try, loss_try, eta_try = problem.derivatives(phi_try)
        if np.isfinite(E_try) and E_try <= E + armijo * slope:
            phi, eta, E, g, H, loss = phi_try, eta_try, E_try, g_try, H_try, loss_try
            continue
        # Backtrack along eta + alpha d_eta (eta is linear in the
        # parameters) with loss-only passes that do not touch X. Out-of-core
        # designs keep no eta (it is as long as the data): their loss-only
        # passes recompute it block by block.
        in_memory = eta is not None
        d_eta = eta_try - eta if in_memory else None
        alpha = 0.5
        while alpha >= 1e-12:
            phi_try = phi + alpha * delta
            if in_memory:
                eta_try = eta + alpha * d_eta
                loss_try = lik.loss(problem.y, eta_try, problem.w)
            else:
                loss_try = problem.design.loss(lik, problem.to_full(phi_try))
            E_try = loss_try + problem.penalty(problem.to_full(phi_try))
            if np.isfinite(E_try) and E_try <= E + armijo * alpha * slope:
                break
            alpha *= 0.5
        if alpha < 1e-12:
            # No decrease is possible at float precision: the objective is as
            # flat as rounding allows around phi; stop here.
            converged = decrement < 1e-6 * max(1.0, abs(E))
            break
        phi, eta = phi_try, eta_try
        E, g, H, loss, eta = problem.derivatives(phi, eta)
    else:
        L, jitter = _robust_cholesky(H)
    return NewtonResult(
        phi=phi,
        theta=problem.to_full(phi),
        chol=L,
        objective=float(E),
        loss=float(loss),
        eta=eta,
        n_iter=n_iter,
        converged=converged,
        jitter=jitter,
    )


def solve_map(problem, phi0=None, *, max_iter=100, tol=1e-8, warn=True):
    """MAP estimate with a subsample warm start on large data.

    Parameters
    ----------
    problem : NewtonProblem
    phi0 : ndarray of shape (p_free,), optional
        Starting point; when given, no subsample warm start is made.
    max_iter, tol : see ``newton_solve``.
    warn : bool
        Emit a ConvergenceWarning when the iteration does not converge.

    Returns
    -------
    NewtonResult
    """
    if phi0 is None:
        phi0 = np.zeros(problem.p_free)
        if problem.design.n >= _SUBSAMPLE_MIN_ROWS:
            sub = problem.subsample(_SUBSAMPLE_ROWS)
            if sub is not None:
                warm = newton_solve(sub, phi0, max_iter=max_iter, tol=1e-4)
                if warm.converged and np.all(np.isfinite(warm.phi)):
                    phi0 = warm.phi
    result = newton_solve(problem, phi0, max_iter=max_iter, tol=tol)
    if warn and not result.converged:
        warnings.warn(
            f"Newton's method did not converge in {result.n_iter} iterations "
            f"(max_iter={max_iter}); the coefficients and their posterior may be "
            "inaccurate. Increase max_iter, standardise the features, or set a "
            "(smaller) prior_scale.",
            ConvergenceWarning,
            stacklevel=3,
        )
    return result
