"""Convergence diagnostics of Markov chains: rank-normalised split R-hat, bulk and tail ESS.

All from Vehtari, Gelman, Simpson, Carpenter & Buerkner, "Rank-normalization,
folding, and localization: an improved R-hat for assessing convergence of
MCMC", Bayesian Analysis 16 (2021) 667-718: chains are split in halves, draws
are replaced by the normal scores of their ranks over all chains, R-hat is
the larger of the values for the draws and for their distances from the
median (folding), and the effective sample size uses the autocorrelations
combined over chains, truncated by Geyer's initial monotone sequence
(Geyer, "Practical Markov chain Monte Carlo", Statistical Science 7, 1992).
"""

import numpy as np
from scipy.special import ndtri
from scipy.stats import rankdata


def _split(chains):
    """(2M, N // 2, ...) halves of (M, N, ...) chains; a middle draw of odd N is dropped."""
    chains = np.asarray(chains, dtype=np.float64)
    if chains.ndim < 2:
        raise ValueError("chains must be an array of shape (chains, draws) or (chains, draws, p).")
    half = chains.shape[1] // 2
    if half < 2:
        raise ValueError("each chain needs at least 4 draws for split diagnostics.")
    return np.concatenate([chains[:, :half], chains[:, -half:]], axis=0)


def _rank_normal(x):
    """Normal scores Phi^{-1}((r - 3/8) / (S + 1/4)) of ranks pooled over the first two axes."""
    M, N = x.shape[:2]
    flat = x.reshape(M * N, -1)
    r = rankdata(flat, method="average", axis=0).reshape(x.shape)
    return ndtri((r - 0.375) / (M * N + 0.25))


def _rhat(chains):
    """Classic potential scale reduction of equal-length chains, per trailing entry."""
    n = chains.shape[1]
    within = np.mean(np.var(chains, axis=1, ddof=1), axis=0)
    between = n * np.var(np.mean(chains, axis=1), axis=0, ddof=1)
    var_plus = (n - 1) / n * within + between / n
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(var_plus / within)


def split_rhat(chains):
    """Rank-normalised split R-hat: the larger of the bulk and the folded (tail) values.

    Parameters
    ----------
    chains : ndarray of shape (M, N) or (M, N, p)
        N draws of one quantity (or of p quantities) from each of M chains.

    Returns
    -------
    float or ndarray of shape (p,)
        About 1 for chains that mix; the paper recommends using the draws
        only when it is below 1.01. NaN for a quantity that never changes.
    """
    halves = _split(chains)
    bulk = _rhat(_rank_normal(halves))
    M, N = halves.shape[:2]
    folded = np.abs(
        halves - np.median(halves.reshape(M * N, -1), axis=0).reshape(halves.shape[2:])
    )
    out = np.maximum(bulk, _rhat(_rank_normal(folded)))
    return _finish(out, halves)


def _finish(values, halves):
    """NaN for constant quantities; a float for 2-D input."""
    M, N = halves.shape[:2]
    constant = np.ptp(halves.reshape(M * N, -1), axis=0).reshape(halves.shape[2:]) == 0
    values = np.where(constant, np.nan, values)
    return float(values) if halves.ndim == 2 else values


def _autocovariance(x):
    """Biased autocovariances along axis 1 of x (M, N, ...) at lags 0..N-1, by FFT."""
    n = x.shape[1]
    centred = x - x.mean(axis=1, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(centred, size, axis=1)
    return np.fft.irfft(f * np.conj(f), size, axis=1)[:, :n] / n


def _ess(chains):
    """ESS of (M, N, ...) chains from combined autocorrelations (the paper's eq. 10-12)."""
    m, n = chains.shape[:2]
    acov = _autocovariance(chains)
    chain_var = acov[:, 0] * n / (n - 1)
    within = chain_var.mean(axis=0)
    var_plus = within * (n - 1) / n
    if m > 1:
        var_plus = var_plus + np.var(chains.mean(axis=1), axis=0, ddof=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        # s_m^2 rho_t,m of each chain, with s_m^2 its unbiased variance.
        scaled = acov * (chain_var / np.where(acov[:, 0] > 0, acov[:, 0], 1.0))[:, None]
        rho = 1.0 - (within - scaled.mean(axis=0)) / var_plus
    # Geyer: sums of adjacent pairs, cut at the first negative one, then
    # made non-increasing.
    pairs = rho[: 2 * (n // 2)].reshape(n // 2, 2, *rho.shape[1:]).sum(axis=1)
    alive = np.cumprod(pairs >= 0, axis=0).astype(bool)
    pairs = np.minimum.accumulate(np.where(alive, pairs, np.inf), axis=0)
    tau = -1.0 + 2.0 * np.sum(np.where(alive, pairs, 0.0), axis=0)
    total = m * n
    # The paper caps the estimate at S log10(S) for antithetic chains.
    with np.errstate(divide="ignore", invalid="ignore"):
        ess = np.minimum(total / np.maximum(tau, 1.0 / np.log10(total)), total * np.log10(total))
    return np.where(var_plus > 0, ess, np.nan)


def ess_bulk(chains):
    """Bulk effective sample size: ESS of the rank-normalised split chains.

    ``chains`` is shaped as for :func:`split_rhat`; a float for (M, N), one
    value per quantity for (M, N, p).
    """
    halves = _split(chains)
    return _finish(_ess(_rank_normal(halves)), halves)


def ess_tail(chains):
    """Tail effective sample size: the smaller ESS of the indicators of the 5% and 95% quantiles.

    Shapes as for :func:`ess_bulk`.
    """
    halves = _split(chains)
    M, N = halves.shape[:2]
    flat = halves.reshape(M * N, -1)
    values = []
    for q in (0.05, 0.95):
        cut = np.quantile(flat, q, axis=0).reshape(halves.shape[2:])
        values.append(_ess((halves <= cut).astype(np.float64)))
    return _finish(np.fmin(values[0], values[1]), halves)
