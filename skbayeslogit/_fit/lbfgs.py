"""L-BFGS on a smooth objective of the parameter vector, in scaled units.

L-BFGS is not invariant to the units of the features or of the weights: its
first step, its curvature pairs and its gradient test are in parameter
units.  The driver therefore works on the parameters u of centred,
unit-spread columns (:class:`skbayeslogit._linear.scaling.ColumnScaling`)
and on the objective rescaled as if the weights averaged 1 (exactly the sum
for unit weights, which keeps scipy's ftol test, relative only above
``|f| = 1``, where it was); the minimiser in theta is the same, but features
scaled by 1e-8 or 1e8 (or weights by 1e300) no longer stop it early or
overflow it.
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize


@dataclass
class LbfgsResult:
    """Where L-BFGS stopped.

    Attributes
    ----------
    theta : ndarray of shape (p,)
    value : float
        The objective at `theta`, in its own units (not rescaled).
    n_iter : int
    stopped_at_limit : bool
        Whether it used up ``max_iter`` without converging.
    message : str
        scipy's account of why it stopped.
    """

    theta: np.ndarray
    value: float
    n_iter: int
    stopped_at_limit: bool
    message: str


def minimize_scaled(objective, theta0, scaling, n_rows, total_weight, max_iter, tol):
    """Minimise ``objective(theta) -> (value, gradient)`` by L-BFGS in the units u.

    Parameters
    ----------
    objective : callable
        The function and its gradient at a full parameter vector.
    theta0 : ndarray of shape (p,)
        Starting point.
    scaling : ColumnScaling
        The map between theta and the scaled parameters u.
    n_rows, total_weight : float
        Rows and their total weight: the objective is multiplied by
        ``n_rows / total_weight``.
    max_iter : int
        L-BFGS iterations.
    tol : float
        Stop when the largest gradient entry in u of the objective divided by
        the total weight is below `tol`.

    Returns
    -------
    LbfgsResult
    """

    unit = n_rows / float(total_weight)

    def in_u(u):
        value, grad = objective(scaling.to_theta(u))
        return value * unit, scaling.gradient_to_u(grad) * unit

    result = minimize(
        in_u,
        scaling.to_u(theta0),
        jac=True,
        method="L-BFGS-B",
        options={
            "maxiter": max_iter,
            "gtol": tol * n_rows,
            "ftol": 1e3 * np.finfo(float).eps,
            "maxcor": 20,
        },
    )
    return LbfgsResult(
        theta=scaling.to_theta(result.x),
        value=float(result.fun) / unit,
        n_iter=int(result.nit),
        stopped_at_limit=not result.success and result.nit >= max_iter,
        message=str(result.message),
    )
