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

On large data (n at least four times the subsample, see ``_metric_rows``)
the Hessian passes, the costly part (n d^2 per pass for one output, about
n (K d)^2 / 2 for K), are avoided until the end. A MAP on a row subsample
(weights rescaled to the full total) is the starting point, and the
subsample's Hessian there, which estimates the full one to relative error
about sqrt(p / m) for m rows and p parameters, is the fixed metric of a
quasi-Newton phase whose passes compute only the loss and the gradient: it
converges linearly at about that rate. When its decrement (in that metric)
is 100 times below ``tol``, one complete pass gives the exact Hessian at
that point; the exact Newton decrement there is checked against ``tol``
and, should it fail (a poor subsample, say), ordinary Newton iterations
continue from there. Either way the returned point is one where the exact
Hessian was computed.

A likelihood that is not log-concave (``log_concave = False``) climbs from
its log-concave relative's MAP with a positive semi-definite curvature and
finishes with Newton on its observed Hessian (module ``observed``).

Reference: Boyd & Vandenberghe, Convex Optimization (2004), Sec. 9.5
(Newton's method, Newton decrement, backtracking line search).
"""

import warnings
from dataclasses import dataclass

import numpy as np
from sklearn.exceptions import ConvergenceWarning

from .lapack import chol_solve, factor, robust_cholesky
from .observed import CLIMB_TOL, is_log_concave, settle_observed
from .problem import NewtonProblem

__all__ = ["NewtonProblem", "NewtonResult", "newton_solve", "solve_map"]

_METRIC_MIN_ROWS = 2_500  # subsample rows at least ...
_METRIC_ROWS_PER_PARAM = 20  # ... and this many per parameter (Hessian error ~ sqrt(p / m))
_METRIC_MIN_RATIO = 4  # the subsample is used only when n >= 4 m
_METRIC_SHARE = 50  # on large data, n / 50 rows (up to _METRIC_MAX_ROWS): fewer cheap passes
_METRIC_MAX_ROWS = 50_000
_METRIC_GOOD_PER_PARAM = 100  # where n allows: 100 rows per parameter (metric error ~0.1) ...
_METRIC_GOOD_SHARE = 10  # ... up to n / 10 rows
_METRIC_TOL_FACTOR = 0.5  # margin for the metric's error in the decrement (sqrt(p / m))
_METRIC_MEMORY = 8  # BFGS pairs kept in the metric phase
_METRIC_SLOW = 0.25  # decrement ratio per step above which exact Newton takes over


def _metric_rows(n, p):
    """Subsample size for the warm start and metric, or None when it would not pay."""
    m = max(_METRIC_MIN_ROWS, _METRIC_ROWS_PER_PARAM * p)
    if n < _METRIC_MIN_RATIO * m:
        return None
    # A larger subsample starts closer and contracts faster (error ~
    # sqrt(p / m)); its Newton passes cost a small share of one full
    # Hessian pass, and each metric step saved is a full read of X. Wide
    # models gain most (figures in benchmarks/README.md).
    good = min(_METRIC_GOOD_PER_PARAM * p, n // _METRIC_GOOD_SHARE)
    return max(m, min(n // _METRIC_SHARE, _METRIC_MAX_ROWS), good)


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


# Relative size of the rounding error of E (a sum of n terms, measured at
# about 1 ulp) below which its difference between two points says nothing,
# and the slopes decide (``_sufficient_decrease``).
_E_ROUNDING = 1e3 * np.finfo(np.float64).eps


def _sufficient_decrease(E, E_try, g_try, delta, decrement, armijo):
    """Whether the full step ``delta`` decreases E enough (Armijo), judged robustly.

    With the decrement ``-g^T delta`` of the step, it passes

    - by a proof from convexity, which rounding of E cannot spoil:
      ``E_try <= E + g_try^T delta``, so ``g_try^T delta <= -armijo *
      decrement`` is enough;
    - where E's two values differ by more than their rounding error
      (``_E_ROUNDING |E|``), by the Armijo test on them,
      ``E_try <= E - armijo * decrement``;
    - where they do not, by the approximate Armijo test of Hager & Zhang
      (2005, SIAM J. Optim. 16(1), Sec. 4), since the values then say
      nothing: the trapezoidal estimate ``(g + g_try)^T delta / 2`` of the
      change must be at most ``-armijo * decrement``. At tol = 1e-12 the
      test on values rejected good Newton steps as often as not (E ~ 1e5
      moved by 3e-11 of rounding against a predicted change of 1e-12), each
      rejection costing a pass, and it accepted any step whose E rounded to
      the same value, overshoots included.
    """
    if not np.isfinite(E_try):
        return False
    slope_try = float(np.dot(g_try, delta))
    if slope_try <= -armijo * decrement:
        return True
    if abs(E_try - E) > _E_ROUNDING * abs(E):
        return E_try <= E - armijo * decrement
    return slope_try <= (1.0 - 2.0 * armijo) * decrement


def newton_solve(
    problem,
    phi0,
    *,
    max_iter=100,
    tol=1e-8,
    armijo=1e-4,
    eta0=None,
    final_step=True,
    start=None,
):
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
    eta0 : ndarray, optional
        The linear predictor at ``phi0``, when the caller has it (the first
        pass then does not recompute it).
    final_step : bool, default=True
        Whether, once the test passes, to take the last Newton step and make
        one more pass there (a point about decrement^2 from the optimum).
        False returns the point where the test passed, as it is: for a
        start that is already polished (the metric phase).
    start : tuple, optional
        ``problem.derivatives(phi0)``'s result, when the caller has it: the
        first pass is then not made.

    Returns
    -------
    NewtonResult
    """
    phi = np.array(phi0, dtype=np.float64)
    state = _NewtonState(phi, *(problem.derivatives(phi, eta0) if start is None else start))
    converged = False
    n_iter = 0
    for n_iter in range(1, max_iter + 1):  # noqa: B007 - n_iter is reported
        state.factorise()
        delta = -chol_solve(state.L, state.g)
        decrement = -float(np.dot(state.g, delta))
        if decrement / 2.0 <= tol:
            converged = True
            if final_step:
                # Quadratically convergent: the full step lands within about
                # decrement^2 of the optimum. One more complete pass there
                # gives the posterior precision at the returned point itself
                # (the Hessian of this iterate would put the standard errors
                # off by O(sqrt(tol)) relative); it costs little more than the
                # pass for eta alone, since X is read once either way.
                state.move(state.phi + delta, problem.derivatives(state.phi + delta))
                state.factorise()
            else:
                n_iter -= 1  # no step was taken
            break
        # The full step is tried with the complete pass (it also computes
        # the new linear predictor): it is accepted in almost every
        # iteration, and then that pass is the next iteration's.
        phi_try = state.phi + delta
        trial = problem.derivatives(phi_try)
        if _sufficient_decrease(state.E, trial[0], trial[1], delta, decrement, armijo):
            state.move(phi_try, trial)
            continue
        step = _backtrack(problem, state, delta, trial[4], decrement, armijo)
        if step is None:
            # No decrease is possible at float precision: the objective is as
            # flat as rounding allows around phi; stop here.
            converged = decrement < 1e-6 * max(1.0, abs(state.E))
            break
        phi_try, eta_try = step
        state.move(phi_try, problem.derivatives(phi_try, eta_try))
    else:
        state.factorise()
    return state.result(problem, n_iter, converged)


class _NewtonState:
    """The current iterate of ``newton_solve``: phi, E, g, H, the NLL, eta, factor."""

    def __init__(self, phi, E, g, H, loss, eta):
        self.phi, self.E, self.g, self.H, self.loss, self.eta = phi, E, g, H, loss, eta
        self.L, self.jitter = None, 0.0

    def move(self, phi, derivatives):
        self.phi = phi
        self.E, self.g, self.H, self.loss, self.eta = derivatives

    def factorise(self):
        self.L, self.jitter = robust_cholesky(self.H)

    def result(self, problem, n_iter, converged):
        return NewtonResult(
            phi=self.phi,
            theta=problem.to_full(self.phi),
            chol=self.L,
            objective=float(self.E),
            loss=float(self.loss),
            eta=self.eta,
            n_iter=n_iter,
            converged=converged,
            jitter=self.jitter,
        )


def _backtrack(problem, state, delta, eta_full, decrement, armijo):
    """Armijo backtracking from ``state`` along ``delta``: (phi, eta) or None.

    The loss along the step is the design's ``loss`` at eta + alpha d_eta
    (eta is linear in the parameters), which does not touch X; a design
    that keeps no eta (it would be as long as the data) returns None for it
    and recomputes the loss in a pass.
    """
    d_eta = None if state.eta is None else eta_full - state.eta
    alpha = 0.5
    while alpha >= 1e-12:
        phi_try = state.phi + alpha * delta
        theta_try = problem.to_full(phi_try)
        eta_try = None if d_eta is None else state.eta + alpha * d_eta
        loss_try = problem.design.loss(
            problem.likelihood, theta_try, problem.y, problem.w, eta_try
        )
        E_try = loss_try + problem.penalty(theta_try)
        if np.isfinite(E_try) and E_try <= state.E - armijo * alpha * decrement:
            return phi_try, eta_try
        alpha *= 0.5
    return None


def _metric_direction(g, pairs, chol):
    """-B^{-1} g: the L-BFGS two-loop recursion with M^{-1} = (chol chol^T)^{-1} inside."""
    q = g.copy()
    alphas = []
    for s_i, y_i, rho_i in reversed(pairs):
        a = rho_i * float(np.dot(s_i, q))
        q -= a * y_i
        alphas.append(a)
    r = chol_solve(chol, q)
    for (s_i, y_i, rho_i), a in zip(pairs, reversed(alphas), strict=True):
        r += (a - rho_i * float(np.dot(y_i, r))) * s_i
    return -r


def _metric_phase(problem, phi, chol, *, max_iter, tol, armijo=1e-4):
    """Quasi-Newton iterations from a fixed metric, with loss-and-gradient passes.

    The step is ``delta = -B^{-1} g`` where B is the metric ``M = chol
    chol^T`` (the subsample's Hessian) corrected by BFGS updates from the
    last ``_METRIC_MEMORY`` steps (the L-BFGS two-loop recursion with
    ``M^{-1}`` in place of its scalar initial matrix; Nocedal & Wright,
    Numerical Optimization, 2nd ed. (2006), Algorithm 7.4). M alone
    contracts the error by about sqrt(p / m) a step; the updates remove the
    error of M along the directions already explored, which is where the
    remaining error lies. Each step is tried at full length and kept when it
    passes ``_sufficient_decrease`` (Armijo on E, or from the slopes where
    rounding of E hides the change). The phase ends, leaving the rest to
    exact Newton, at the first step that fails, when the decrement stops
    shrinking by ``_METRIC_SLOW`` a step, or when half the decrement is
    below ``tol``. When the observed contraction predicts that the next
    step will end the phase, its trial pass is a complete one: its Hessian
    is then the exact one at the returned point, and the separate pass for
    it is saved.

    Parameters
    ----------
    problem : NewtonProblem
    phi : ndarray of shape (p_free,)
    chol : ndarray of shape (p_free, p_free)
        Lower Cholesky factor of the metric.
    max_iter : int
    tol : float
    armijo : float

    Returns
    -------
    phi : ndarray of shape (p_free,)
    eta : ndarray or None
        The linear predictor at ``phi`` (None for out-of-core designs).
    n_iter : int
        Passes made (accepted and rejected steps).
    last : tuple or None
        ``problem.derivatives(phi)`` when the last pass was a complete one.
    """
    E, g, _, eta = problem.value_grad(phi)
    last = None
    pairs = []  # (s, y, 1 / y^T s), oldest first
    previous = np.inf
    n_iter = 0
    while n_iter < max_iter:
        delta = _metric_direction(g, pairs, chol)
        decrement = -float(np.dot(g, delta))
        if not np.isfinite(decrement) or decrement <= 0.0 or decrement / 2.0 <= tol:
            break
        if decrement > _METRIC_SLOW * previous:
            break
        n_iter += 1
        phi_try = phi + delta
        # The next decrement, if the contraction holds, is decrement^2 / previous.
        complete = np.isfinite(previous) and decrement * decrement / previous / 2.0 <= tol
        if complete:
            last = problem.derivatives(phi_try)
            E_try, g_try, _, _, eta_try = last
        else:
            E_try, g_try, _, eta_try = problem.value_grad(phi_try)
        if not _sufficient_decrease(E, E_try, g_try, delta, decrement, armijo):
            last = None
            break
        y_step = g_try - g
        curvature = float(np.dot(y_step, delta))
        if curvature > 0.0:
            pairs.append((delta, y_step, 1.0 / curvature))
            del pairs[:-_METRIC_MEMORY]
        phi, E, g, eta = phi_try, E_try, g_try, eta_try
        previous = decrement
        if complete:
            # The exact test at phi follows in newton_solve, with this Hessian.
            break
    return phi, eta, n_iter, last


def _subsample_start(problem, phi0, max_iter):
    """(phi0, metric): the subsample's start and Hessian factor, or (phi0, None)."""
    m = _metric_rows(problem.design.n, problem.p_free)
    sub = problem.subsample(m) if m is not None else None
    if sub is None:
        return phi0, None
    if phi0 is not None:
        # A given start (the prior-scale search): the metric there.
        _, _, H, _, _ = sub.derivatives(np.asarray(phi0, dtype=np.float64))
        return phi0, (factor(H) if np.all(np.isfinite(H)) else None)
    # The subsample's MAP is off the full one by its sampling error: E at it
    # exceeds the full minimum by about p (n / m - 1) / 2 on average (the
    # error has covariance (n / m - 1) H^{-1}). Solving the subsample more
    # finely than 1/10 of that buys nothing: the metric steps that follow are
    # as many, and its last Newton pass is saved.
    gap = 0.5 * problem.p_free * (problem.design.n / m - 1.0)
    warm = newton_solve(
        sub,
        np.zeros(problem.p_free),
        max_iter=max_iter,
        tol=max(1e-4, 1e-1 * gap),
        final_step=False,
    )
    if warm.converged and warm.jitter == 0.0 and np.all(np.isfinite(warm.phi)):
        return warm.phi, warm.chol
    return None, None


def _solve_climbing(problem, phi0, max_iter, tol):
    """MAP of the subsample-metric Newton below, in the problem's own curvature."""
    phi0, metric = _subsample_start(problem, phi0, max_iter)
    if phi0 is None:
        phi0 = np.zeros(problem.p_free)
    if metric is None:
        return newton_solve(problem, phi0, max_iter=max_iter, tol=tol)
    phi1, eta1, spent, last = _metric_phase(
        problem,
        np.array(phi0, dtype=np.float64),
        metric,
        max_iter=max_iter,
        tol=tol * _METRIC_TOL_FACTOR,
    )
    result = newton_solve(
        problem,
        phi1,
        max_iter=max(max_iter - spent, 1),
        tol=tol,
        eta0=eta1,
        final_step=False,
        start=last,
    )
    result.n_iter += spent
    return result


def solve_map(problem, phi0=None, *, max_iter=100, tol=1e-8, warn=True):
    """MAP estimate; on large data, a subsample start and metric (module docstring).

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
    if is_log_concave(problem.likelihood):
        result = _solve_climbing(problem, phi0, max_iter, tol)
    else:
        start = getattr(problem.likelihood, "start_likelihood", None)
        if phi0 is None and start is not None:
            start_problem = problem.with_likelihood(start)
            phi0 = solve_map(start_problem, max_iter=max_iter, tol=tol, warn=False).phi
        climbed = _solve_climbing(problem, phi0, max_iter, max(tol, CLIMB_TOL))
        polished = newton_solve(problem.with_observed(), climbed.phi, max_iter=max_iter, tol=tol)
        result = settle_observed(problem, climbed, polished, warn)
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
