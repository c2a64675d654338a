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


class WarmStartedSearch:
    """Fits at values of one hyperparameter, each started from the nearest earlier one.

    ``fit(u, phi0)`` returns ``(NewtonResult, log evidence)``; the results
    are kept by value (``cache``), so a value is never fitted twice.

    Parameters
    ----------
    fit : callable
    phi_start : ndarray or None
        The start of the first fit.
    """

    def __init__(self, fit, phi_start=None):
        self.fit = fit
        self.phi_start = phi_start
        self.cache = {}

    def log_evidence(self, u):
        """The log evidence at ``u`` (fitted on first use)."""
        u = float(u)
        if u not in self.cache:
            nearest = min(self.cache, key=lambda v: abs(v - u)) if self.cache else None
            phi0 = self.phi_start if nearest is None else self.cache[nearest][0].phi
            with warnings.catch_warnings():
                # Trial fits: the chosen one is refitted with warnings on.
                warnings.simplefilter("ignore")
                self.cache[u] = self.fit(u, phi0)
        return self.cache[u][1]

    def best(self):
        """The value of largest evidence so far, its result and log evidence."""
        u = max(self.cache, key=lambda v: self.cache[v][1])
        return u, *self.cache[u]

    def grid_then_brent(self, grid, refine_at_first=True, xatol=1e-3):
        """Evidence on ``grid`` (increasing), then bounded Brent between the best point's
        neighbours; the best value found, its result and log evidence.

        ``refine_at_first=False``: a maximum at the grid's first value is
        kept as it is.
        """
        values = [self.log_evidence(u) for u in grid]
        best = int(np.argmax(values))
        lo, hi = grid[max(best - 1, 0)], grid[min(best + 1, len(grid) - 1)]
        if hi > lo and (best > 0 or refine_at_first):
            minimize_scalar(
                lambda u: -self.log_evidence(u),
                bounds=(lo, hi),
                method="bounded",
                options={"xatol": xatol},
            )
        return self.best()


def maximise_evidence(design, w, fit_at, phi_start=None):
    """prior_scale maximising the Laplace evidence, on a log scale.

    A coarse grid of nine scales, a decade apart around 1 / (median
    weighted feature sd), brackets the maximum; bounded Brent on
    log10(scale) within one decade either side of the best grid point
    refines it. Each fit starts from the nearest earlier solution (the
    first from ``phi_start``).

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
    phi_start : ndarray, optional

    Returns
    -------
    scale, result, log_evidence
    """
    sd = design.column_moments(w)[1]
    sd = sd[sd > 0]
    ref = 1.0 / float(np.median(sd)) if len(sd) else 1.0
    grid = np.log10(ref) + np.arange(-4.0, 5.0)
    search = WarmStartedSearch(lambda u, phi0: fit_at(10.0**u, phi0, warn=False), phi_start)
    u_best, result, _ = search.grid_then_brent(grid, refine_at_first=False)
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
    result, log_ev = fit_at(scale, result.phi, warn=True)
    return scale, result, log_ev
