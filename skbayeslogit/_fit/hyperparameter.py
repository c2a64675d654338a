"""A likelihood hyperparameter chosen by the Laplace evidence, and averaged over.

A model whose likelihood has a hyperparameter (the label-flip model's flip
rate) returns a :class:`LikelihoodSearch` from ``_likelihood_search``; the
estimator's ``fit`` then calls :func:`maximise_joint_evidence`.

The search is coordinate-wise: the prior scale (``evidence.
maximise_evidence``, when it is "auto") at the grid's first value, then the
hyperparameter at that scale (grid, then bounded Brent between the best
point's neighbours), then the scale again, until neither moves. Each fit
starts from the nearest earlier solution, so that the hyperparameter path
is a continuation from the first value (for the label-flip model, the
plain logistic fit).

The posterior then integrates the hyperparameter out rather than plugging
in its maximiser (which makes the coefficient intervals too narrow: they
would treat a fitted rate as known). At the chosen scale, with a uniform
prior on the hyperparameter's range, its posterior is proportional to the
Laplace evidence; the posterior of the parameters is the mixture of the
Laplace Gaussians N(m_u, S_u) over a grid of values u with weights
p_u proportional to the evidence times the trapezoid rule's weights, and is
reported moment-matched: m = sum p_u m_u, S = sum p_u (S_u + (m_u - m)(m_u -
m)^T). This is Bayesian model averaging over the hyperparameter on a grid,
as the integrated nested Laplace approximation integrates its
hyperparameters (Rue, Martino & Chopin, JRSS-B 71, 2009, Sec. 3.1); the
grid is spaced about one posterior sd of the hyperparameter apart, found
from the evidence's fall-off, and runs out on each side until the evidence
is ``_TAIL_NATS`` below its peak or the range ends.
"""

import warnings
from dataclasses import dataclass
from functools import partial

import numpy as np
from scipy.linalg import solve_triangular

from .evidence import WarmStartedSearch, maximise_evidence
from .lapack import robust_cholesky

_MAX_ROUNDS = 3  # scale / hyperparameter alternations
_SCALE_SETTLED = 0.01  # decades: the scale no longer moves
_VALUE_TOL = 1e-3  # Brent's absolute tolerance on the hyperparameter
_STEP_NATS = (0.25, 1.0)  # the grid step's evidence drop: about one sd is 0.5 nats
_TAIL_NATS = 6.0  # the grid ends this far below the peak (e^-6 of the mass left out)
_MAX_STEPS = 16  # grid points on each side at most
_WIDEST = 0.125  # the longest step, as a share of the range


@dataclass(frozen=True)
class LikelihoodSearch:
    """A likelihood hyperparameter for the evidence to choose.

    Attributes
    ----------
    make : callable
        ``make(u)`` -> the likelihood at the value ``u``.
    grid : ndarray
        Increasing candidate values for the search; ``grid[0]`` is the
        lower end of the hyperparameter's range.
    upper : float
        The range's (excluded) upper end.
    """

    make: object
    grid: np.ndarray
    upper: float


@dataclass
class JointFit:
    """What :func:`maximise_joint_evidence` returns.

    ``result`` and ``log_evidence`` are the fit at the chosen ``value`` and
    ``scale``; ``theta`` and ``chol`` (the lower Cholesky factor of the
    precision in free coordinates) are the posterior averaged over the
    hyperparameter; ``value_mean`` and ``value_sd`` its posterior moments.
    """

    scale: float
    value: float
    likelihood: object
    result: object
    log_evidence: float
    theta: np.ndarray
    chol: np.ndarray
    value_mean: float
    value_sd: float


def _fit_value(fit_at, scale, make, u, phi0):
    return fit_at(scale, phi0, False, make(u))


def maximise_joint_evidence(design, w, fit_at, search, prior_scale, free_map=None):
    """Prior scale and hyperparameter maximising the Laplace evidence; the averaged posterior.

    Parameters
    ----------
    design, w :
        As for ``evidence.maximise_evidence``.
    fit_at : callable
        ``fit_at(scale, phi0, warn, lik)`` -> ``(result, log_evidence)``.
    search : LikelihoodSearch
    prior_scale : float or "auto"
    free_map : ndarray or None
        T with full = T @ free, for the averaged mean.

    Returns
    -------
    JointFit
    """
    make, grid = search.make, np.asarray(search.grid, dtype=np.float64)
    auto_scale = prior_scale == "auto"

    def best_scale(lik, phi0):
        if auto_scale:
            return maximise_evidence(design, w, partial(fit_at, lik=lik))
        return (prior_scale, *fit_at(prior_scale, phi0, False, lik))

    with warnings.catch_warnings():
        # The trial fits' warnings say nothing about the chosen one, which
        # is refitted below with warnings on.
        warnings.simplefilter("ignore")
        scale, result, log_ev = best_scale(make(float(grid[0])), None)
        for _ in range(_MAX_ROUNDS):
            values = WarmStartedSearch(partial(_fit_value, fit_at, scale, make), result.phi)
            value, result, log_ev = values.grid_then_brent(grid, xatol=_VALUE_TOL)
            if not auto_scale:
                break
            new_scale, result, log_ev = best_scale(make(value), result.phi)
            settled = abs(np.log10(new_scale / scale)) < _SCALE_SETTLED
            scale = new_scale
            if settled:
                break
        if auto_scale:
            # The scale moved after the last hyperparameter search: fits anew.
            values = WarmStartedSearch(partial(_fit_value, fit_at, scale, make), result.phi)
            values.cache[value] = (result, log_ev)
        theta, chol, value_mean, value_sd = average_over_value(
            values, value, float(grid[0]), search.upper, free_map
        )
    likelihood = make(value)
    result, log_ev = fit_at(scale, result.phi, True, likelihood)
    return JointFit(scale, value, likelihood, result, log_ev, theta, chol, value_mean, value_sd)


def _step(values, u_best, lower, upper):
    """A grid step over which the evidence falls by about half a nat (one sd)."""
    peak = values.log_evidence(u_best)
    width = upper - lower
    h = 0.02 * width
    for _ in range(8):
        sides = [u for u in (u_best - h, u_best + h) if lower <= u < upper]
        drop = peak - np.mean([values.log_evidence(u) for u in sides])
        if _STEP_NATS[0] <= drop <= _STEP_NATS[1]:
            break
        if not np.isfinite(drop):  # a failed fit beside the peak: step shorter
            drop = np.inf
        # A quadratic fall-off gives drop ~ h^2: the factor lands on 0.5 nats.
        # At most an eighth of the range: a flat evidence still gets a grid.
        h = min(h * float(np.clip(np.sqrt(0.5 / max(drop, 1e-3)), 0.1, 8.0)), _WIDEST * width)
    return h


def _grid(values, u_best, lower, upper):
    """Grid points from the peak outward, one step apart, until the tail or the range ends."""
    peak = values.log_evidence(u_best)
    h = _step(values, u_best, lower, upper)
    points = [u_best]
    for direction in (-1.0, 1.0):
        for k in range(1, _MAX_STEPS + 1):
            u = u_best + direction * k * h
            if u < lower:
                if points[0] > lower:
                    points.insert(0, lower)
                break
            if u >= upper:
                break
            if direction < 0:
                points.insert(0, u)
            else:
                points.append(u)
            if values.log_evidence(u) < peak - _TAIL_NATS:
                break
    return np.array(points)


def average_over_value(values, u_best, lower, upper, free_map=None):
    """The posterior averaged over the hyperparameter, moment-matched (module docstring).

    Parameters
    ----------
    values : WarmStartedSearch
        Fits at the chosen scale by hyperparameter value; holds ``u_best``.
    u_best : float
        The evidence maximiser.
    lower, upper : float
        The hyperparameter's range (the uniform prior's support).
    free_map : ndarray or None

    Returns
    -------
    theta : ndarray (p_full,)
        The averaged mean of the full parameters.
    chol : ndarray (p_free, p_free)
        Lower Cholesky factor of the inverse averaged covariance (free).
    value_mean, value_sd : float
        The hyperparameter's posterior mean and sd on the grid.
    """
    grid = _grid(values, u_best, lower, upper)
    log_ev = np.array([values.log_evidence(u) for u in grid])
    log_ev[~np.isfinite(log_ev)] = -np.inf  # a failed fit weighs nothing
    # Trapezoid weights on the (possibly uneven) grid, times the evidence.
    gaps = np.diff(grid)
    weights = 0.5 * (np.r_[gaps, 0.0] + np.r_[0.0, gaps]) * np.exp(log_ev - log_ev.max())
    p = weights / weights.sum()
    phis = np.array([values.cache[float(u)][0].phi for u in grid])
    mean = p @ phis
    cov = np.zeros((len(mean), len(mean)))
    for p_u, u, phi in zip(p, grid, phis, strict=True):
        inv_chol = solve_triangular(values.cache[float(u)][0].chol, np.eye(len(mean)), lower=True)
        cov += p_u * (inv_chol.T @ inv_chol + np.outer(phi - mean, phi - mean))
    precision = np.linalg.inv(cov)
    chol, _ = robust_cholesky(0.5 * (precision + precision.T))
    theta = mean if free_map is None else free_map @ mean
    value_mean = float(p @ grid)
    value_sd = float(np.sqrt(max(p @ (grid - value_mean) ** 2, 0.0)))
    return theta, chol, value_mean, value_sd
