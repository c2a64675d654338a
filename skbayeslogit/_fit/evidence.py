"""The Laplace evidence of a MAP fit, and the prior scale that maximises it."""

import warnings

import numpy as np
from scipy.optimize import minimize_scalar

LOG_2PI = float(np.log(2.0 * np.pi))


def log_evidence(layout, p_free, result, scale, intercept_scale):
    """Laplace log evidence log p(y | X, prior_scale).

    log Z = -E(theta*) + (p/2) log(2 pi) - (1/2) log det H
            - sum over proper-prior parameters of (1/2) log(2 pi s^2),
    with E the penalised objective at the MAP and p the number of free
    parameters (MacKay 1992; Bishop 2006, eq. 4.137). With a flat
    intercept prior the evidence is defined up to an additive constant
    that does not depend on ``prior_scale``; it is None without a slope
    prior (improper prior, no evidence).

    Parameters
    ----------
    layout : ParameterLayout
    p_free : int
    result : NewtonResult
    scale, intercept_scale : float or None
    """
    if scale is None:
        return None
    log_det = 2.0 * float(np.sum(np.log(np.diag(result.chol))))
    # Every slope has the proper N(0, scale^2) prior (the free map only
    # ever constrains intercepts when a slope prior is set).
    const = -0.5 * layout.n_coef * (LOG_2PI + 2.0 * np.log(scale))
    if layout.fit_intercept and intercept_scale is not None:
        const += -0.5 * layout.q * (LOG_2PI + 2.0 * np.log(intercept_scale))
    return float(-result.objective + 0.5 * p_free * LOG_2PI - 0.5 * log_det + const)


def maximise_evidence(design, w, fit_at):
    """prior_scale maximising the Laplace evidence, on a log scale.

    A coarse grid of nine scales, a decade apart around 1 / (median
    weighted feature sd), brackets the maximum; bounded Brent on
    log10(scale) within one decade either side of the best grid point
    refines it. Each fit starts from the nearest earlier solution.

    When the smallest scale wins, the data do not support any slope
    (the evidence keeps rising as the prior squeezes them to zero, as for
    pure-noise labels); that scale is returned as is, without a warning.
    When the largest wins, the evidence may keep rising beyond the range
    (typical of separated classes), and a warning says so.

    Parameters
    ----------
    design : a design (``_linear.design.DesignBase``)
    w : ndarray or None
        Row weights, for designs that do not hold them.
    fit_at : callable
        ``fit_at(scale, phi0, warn) -> (NewtonResult, log evidence)``.

    Returns
    -------
    scale, result, log_evidence
    """
    sd = design.column_moments(w)[1]
    sd = sd[sd > 0]
    ref = 1.0 / float(np.median(sd)) if len(sd) else 1.0
    grid = np.log10(ref) + np.arange(-4.0, 5.0)
    cache = {}

    def neg_log_ev(u):
        if u in cache:
            return -cache[u][1]
        nearest = min(cache, key=lambda v: abs(v - u)) if cache else None
        phi0 = None if nearest is None else cache[nearest][0].phi
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result, log_ev = fit_at(10.0**u, phi0, warn=False)
        cache[u] = (result, log_ev)
        return -log_ev

    values = [neg_log_ev(u) for u in grid]
    best = int(np.argmin(values))
    if best > 0:
        lo, hi = grid[best - 1], grid[min(best + 1, len(grid) - 1)]
        minimize_scalar(neg_log_ev, bounds=(lo, hi), method="bounded", options={"xatol": 1e-3})
    u_best = min(cache, key=lambda v: -cache[v][1])
    if u_best >= grid[-1] - 1e-6:
        warnings.warn(
            "the Laplace evidence is still rising at the largest prior_scale searched "
            f"({10.0 ** grid[-1]:.3g}), as it does when the classes are (nearly) "
            "separated; prior_scale_ is that edge. Check for separation, standardise "
            "the features, or pass a prior_scale.",
            UserWarning,
            stacklevel=3,
        )
    scale = 10.0**u_best
    # Refit at the chosen scale with warnings on, so a real convergence
    # problem is reported.
    result, log_ev = fit_at(scale, cache[u_best][0].phi, warn=True)
    return scale, result, log_ev
