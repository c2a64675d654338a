"""MAP fits of likelihoods that are not log-concave: climb, then the observed Hessian.

A likelihood that is not log-concave in eta (the label-flip model) says so
with ``log_concave = False`` (absent means True). Its ``derivatives`` then
return a positive semi-definite curvature ``h`` to climb with, and its
``observed_derivatives`` the exact second derivative. ``solve_map``
(``newton``) starts such a fit from the MAP of its ``start_likelihood``,
when it names one (a log-concave relative: the plain logistic for the
label-flip model), climbs
with the PSD curvature until half its decrement is below ``CLIMB_TOL``
nats, and finishes with Newton on the problem's observed version
(``NewtonProblem.with_observed``): the climbing curvature converges only
linearly (it leaves out the negative curvature of the rows the model
disbelieves), Newton with the observed Hessian quadratically, and the
observed Hessian's factor at the returned point is the posterior precision.
"""

import warnings

import numpy as np

from .lapack import robust_cholesky

# Climbing stops here (nats); the observed-Hessian Newton finishes from there.
CLIMB_TOL = 1e-2


class ObservedPart:
    """A likelihood's observed derivatives served as ``derivatives``, one sign of h.

    ``sign`` None passes h as it is; +1 keeps max(h, 0), -1 keeps max(-h, 0).
    """

    def __init__(self, likelihood, sign):
        self.likelihood = likelihood
        self.sign = sign
        self.n_outputs = likelihood.n_outputs
        self.pairs = getattr(likelihood, "pairs", None)

    def derivatives(self, y, eta, w):
        loss, g, h = self.likelihood.observed_derivatives(y, eta, w)
        if self.sign is not None:
            h = np.maximum(self.sign * h, 0.0)
        return loss, g, h


def observed_loss_grad_hess(design, likelihood, y, w, theta, eta):
    """Loss, gradient and Hessian from the likelihood's ``observed_derivatives``.

    The design's binary pass forms sqrt(h) X, so it needs h >= 0; an
    observed h of either sign is summed as the difference of a pass over
    its positive parts and one over its negative parts. The multiclass pass
    is linear in h of any sign and takes one.
    """
    signs = (None,) if design.q > 1 else (1.0, -1.0)
    H = 0.0
    for sign in signs:
        part = ObservedPart(likelihood, sign)
        loss_s, g_s, H_s, eta = design.loss_grad_hess(part, y, w, theta, eta)
        if sign != -1.0:
            loss, g = loss_s, g_s
        H = H + (1.0 if sign is None else sign) * H_s
    return loss, g, H, eta


def is_log_concave(likelihood):
    """Whether the likelihood declares itself log-concave in eta (the default)."""
    return getattr(likelihood, "log_concave", True)


def settle_observed(problem, climbed, polished, warn):
    """The observed-Hessian fit, its precision checked; ``climbed``'s passes added.

    Should the observed Hessian not be positive definite at the returned
    point (``polished.jitter > 0``), that point is not a strict local
    maximum (a saddle or a flat ridge): the climbing curvature's factor
    stands in, with a warning.
    """
    polished.n_iter += climbed.n_iter
    if polished.jitter > 0.0:
        _, _, H, _, _ = problem.derivatives(polished.phi, polished.eta)
        polished.chol, polished.jitter = robust_cholesky(H)
        if warn:
            warnings.warn(
                "the observed Hessian at the MAP is not positive definite (the likelihood "
                "is not log-concave and the fit stopped at a saddle or on a flat ridge); the "
                "posterior uses the solver's positive semi-definite curvature instead, which "
                "understates the spread. Set a smaller prior_scale or a fixed flip rate.",
                UserWarning,
                stacklevel=4,
            )
    return polished
