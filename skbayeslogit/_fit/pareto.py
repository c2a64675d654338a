"""Generalised Pareto tail fit and Pareto-smoothed importance weights.

The tail fit is the estimator of Zhang & Stephens, "A new and efficient
estimation method for the generalized Pareto distribution", Technometrics
51 (2009) 316-325; the smoothing and its diagnostic are those of Vehtari,
Simpson, Gelman, Yao & Gabry, "Pareto smoothed importance sampling",
Journal of Machine Learning Research 25 (2024), paper 72.

Shapes are reported in the usual sign convention: a generalised Pareto
variable with shape ``k > 0`` has a power-law tail with index ``1 / k``
(moments of order ``1 / k`` and above are infinite); ``k = 0`` is the
exponential tail.
"""

import math

import numpy as np


def fit_generalized_pareto(x):
    """Shape and scale of a generalised Pareto fit to positive exceedances.

    Zhang & Stephens (2009) write the distribution as
    F(x) = 1 - (1 - theta' x)^(1 / k') with theta' = k' / sigma and
    k' = -k. For a fixed theta' the maximum-likelihood k' is
    -mean(log(1 - theta' x)) and the profile log-likelihood is
    n (log(theta' / k') + k' - 1). The estimate of theta' is the posterior
    mean over a grid of m = 20 + floor(sqrt(n)) points
    theta'_j = 1 / x_(n) + (1 - sqrt(m / (j - 1/2))) / (3 x*), with x* the
    first quartile x_(floor(n / 4 + 1/2)), each point weighted by its
    profile likelihood (their Sec. 3).

    Parameters
    ----------
    x : ndarray of shape (n,)
        Exceedances over a threshold, all >= 0; at least 5 values.

    Returns
    -------
    k : float
        Shape (tail heaviness), usual sign: > 0 heavy, 0 exponential.
    sigma : float
        Scale, > 0.
    """
    x = np.sort(np.asarray(x, dtype=np.float64))
    n = len(x)
    if n < 5:
        raise ValueError(f"the tail fit needs at least 5 exceedances, got {n}.")
    if not np.all(np.isfinite(x)) or x[0] < 0:
        raise ValueError("exceedances must be finite and non-negative.")
    if x[-1] <= 0:
        return 0.0, 0.0
    m = 20 + int(math.floor(math.sqrt(n)))
    quartile = x[max(int(math.floor(n / 4.0 + 0.5)) - 1, 0)]
    if quartile <= 0:
        # Ties at zero in the lower quarter: the smallest positive value keeps
        # the grid finite (the estimate depends on it only through the grid).
        quartile = x[x > 0][0]
    j = np.arange(1, m + 1, dtype=np.float64)
    theta = 1.0 / x[-1] + (1.0 - np.sqrt(m / (j - 0.5))) / (3.0 * quartile)
    # k'(theta) for every grid point at once: (m, n) logs of positive values.
    k_prime = -np.mean(np.log1p(-np.outer(theta, x)), axis=1)
    profile = n * (np.log(theta / k_prime) + k_prime - 1.0)
    weights = np.exp(profile - profile.max())
    weights /= weights.sum()
    theta_hat = float(weights @ theta)
    k_hat = float(-np.mean(np.log1p(-theta_hat * x)))
    sigma = k_hat / theta_hat
    return -k_hat, float(sigma)


def _tail_quantiles(probs, k, sigma):
    """Generalised Pareto quantile function F^{-1}(p) (usual sign of k)."""
    if abs(k) < 1e-12:
        return -sigma * np.log1p(-probs)
    return sigma * np.expm1(-k * np.log1p(-probs)) / k


# Weakly informative adjustment of the shape estimate toward 0.5, worth ten
# pseudo-exceedances (Vehtari et al. 2024, appendix; from memory).
_PRIOR_WEIGHT = 10.0
_PRIOR_SHAPE = 0.5


def sample_size_threshold(n_draws):
    """min(1 - 1 / log10(S), 0.7): the largest k at which S draws are reliable.

    From Vehtari et al. (2024), Sec. 3: with S draws the error of the
    smoothed estimate stays small only for k below 1 - 1 / log10(S), and
    never beyond 0.7.
    """
    return min(1.0 - 1.0 / math.log10(n_draws), 0.7)


def tail_length(n_draws):
    """M = ceil(min(S / 5, 3 sqrt(S))), the number of largest ratios in the tail fit."""
    return int(math.ceil(min(0.2 * n_draws, 3.0 * math.sqrt(n_draws))))


def pareto_smooth(log_ratios):
    """Pareto-smoothed normalised importance weights and the shape estimate.

    The M largest ratios (``tail_length``) are replaced by the expected
    order statistics u + F^{-1}((z - 1/2) / M), z = 1..M, of a generalised
    Pareto distribution fitted to their exceedances over u, the largest
    ratio outside the tail; no smoothed ratio exceeds the largest raw ratio
    (Vehtari et al. 2024, Sec. 3).

    Parameters
    ----------
    log_ratios : ndarray of shape (S,)
        log target density minus log proposal density, up to a constant.

    Returns
    -------
    weights : ndarray of shape (S,)
        Smoothed weights, summing to 1.
    k : float
        Shape of the tail fit (after the weak adjustment toward 0.5); NaN
        when the tail is too short to fit (fewer than 5 values).
    """
    lr = np.asarray(log_ratios, dtype=np.float64)
    if not np.all(np.isfinite(lr)):
        raise ValueError("log importance ratios must be finite.")
    S = len(lr)
    ratios = np.exp(lr - lr.max())
    M = tail_length(S)
    k = float("nan")
    if M >= 5 and S > M:
        order = np.argsort(ratios, kind="stable")
        tail = order[-M:]
        cutoff = ratios[order[-M - 1]]
        exceed = ratios[tail] - cutoff
        if exceed[-1] > 0:
            k_fit, sigma = fit_generalized_pareto(exceed)
            k = (M * k_fit + _PRIOR_WEIGHT * _PRIOR_SHAPE) / (M + _PRIOR_WEIGHT)
            probs = (np.arange(1, M + 1) - 0.5) / M
            smooth = cutoff + _tail_quantiles(probs, k, sigma)
            ratios[tail] = np.minimum(smooth, 1.0)
        else:
            k = -math.inf
    return ratios / ratios.sum(), k


def effective_sample_size(weights):
    """1 / sum(w^2) of normalised weights (Kong 1992; Vehtari et al. 2024, Sec. 3)."""
    w = np.asarray(weights, dtype=np.float64)
    return float(1.0 / np.sum(w * w))
