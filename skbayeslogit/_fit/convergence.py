"""Convergence diagnostics of Markov chains: rank-normalised split R-hat, bulk and tail ESS.

All from Vehtari, Gelman, Simpson, Carpenter & Buerkner, "Rank-normalization,
folding, and localization: an improved R-hat for assessing convergence of
MCMC", Bayesian Analysis 16 (2021) 667-718: chains are split in halves, draws
are replaced by the normal scores of their ranks over all chains, R-hat is
the larger of the values for the draws and for their distances from the
median (folding), and the effective sample size uses the autocorrelations
combined over chains, truncated by Geyer's initial monotone sequence
(Geyer, "Practical Markov chain Monte Carlo", Statistical Science 7, 1992).

Internally every quantity's draws are laid out together, (p, chains,
draws), so that the sorts and transforms run along contiguous memory: the
sampler of ``hmc`` calls these on its kept draws while it runs.
"""

import numpy as np
from scipy import fft
from scipy.special import ndtri


def _halves(chains):
    """Split halves (p, 2M, N // 2) of (M, N, ...) chains, and the trailing shape.

    A middle draw of odd N is dropped.
    """
    chains = np.asarray(chains, dtype=np.float64)
    if chains.ndim < 2:
        raise ValueError("chains must be an array of shape (chains, draws) or (chains, draws, p).")
    M, N = chains.shape[:2]
    half = N // 2
    if half < 2:
        raise ValueError("each chain needs at least 4 draws for split diagnostics.")
    by_quantity = np.moveaxis(chains.reshape(M, N, -1), 2, 0)
    halves = np.concatenate([by_quantity[:, :, :half], by_quantity[:, :, N - half :]], axis=1)
    return halves, chains.shape[2:]


def _average_ranks(rows):
    """Ranks 1..S along the last axis of (p, S); tied values share their average rank."""
    p, S = rows.shape
    order = np.argsort(rows, axis=1)
    ordered = np.take_along_axis(rows, order, axis=1)
    starts = np.empty((p, S), dtype=bool)
    starts[:, 0] = True
    np.not_equal(ordered[:, 1:], ordered[:, :-1], out=starts[:, 1:])
    flat = starts.ravel()
    first = np.flatnonzero(flat)
    size = np.diff(first, append=flat.size)
    # A run of equal values at 1-based positions f + 1 .. f + size averages
    # to f + (size + 1) / 2 (runs never cross rows: each row starts one).
    mean_rank = first % S + 0.5 * (size + 1.0)
    ranks = np.empty(p * S)
    ranks[(order + S * np.arange(p)[:, None]).ravel()] = mean_rank[np.cumsum(flat) - 1]
    return ranks.reshape(p, S)


def _rank_normal(x):
    """Normal scores Phi^{-1}((r - 3/8) / (S + 1/4)) of ranks pooled over chains, (p, M, N)."""
    p, M, N = x.shape
    r = _average_ranks(x.reshape(p, M * N)).reshape(p, M, N)
    return ndtri((r - 0.375) / (M * N + 0.25))


def _rhat(x):
    """Classic potential scale reduction of (p, M, N) equal-length chains, per quantity."""
    n = x.shape[2]
    within = np.mean(np.var(x, axis=2, ddof=1), axis=1)
    between = n * np.var(np.mean(x, axis=2), axis=1, ddof=1)
    var_plus = (n - 1) / n * within + between / n
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(var_plus / within)


def _folded(halves):
    """Distances of the draws from each quantity's median over all chains."""
    p = halves.shape[0]
    return np.abs(halves - np.median(halves.reshape(p, -1), axis=1)[:, None, None])


def _finish(values, halves, shape):
    """NaN for constant quantities; the caller's trailing shape (a float for 2-D chains)."""
    p = halves.shape[0]
    constant = np.ptp(halves.reshape(p, -1), axis=1) == 0
    values = np.where(constant, np.nan, values)
    return float(values[0]) if shape == () else values.reshape(shape)


def _autocovariance(x):
    """Biased autocovariances along the last axis of x (..., N) at lags 0..N-1, by FFT."""
    n = x.shape[-1]
    centred = x - x.mean(axis=-1, keepdims=True)
    # Zero-padded to at least 2N - 1 so that the circular correlation is the linear one.
    size = fft.next_fast_len(2 * n - 1, real=True)
    f = fft.rfft(centred, size, axis=-1)
    return fft.irfft(f.real**2 + f.imag**2, size, axis=-1)[..., :n] / n


def _ess(x):
    """ESS of (p, M, N) chains from combined autocorrelations (the paper's eq. 10-12)."""
    m, n = x.shape[1:]
    acov = _autocovariance(x)
    chain_var = acov[:, :, 0] * n / (n - 1)
    within = chain_var.mean(axis=1)
    var_plus = within * (n - 1) / n
    if m > 1:
        var_plus = var_plus + np.var(x.mean(axis=2), axis=1, ddof=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        # s_m^2 rho_t,m of each chain, with s_m^2 its unbiased variance.
        ratio = chain_var / np.where(acov[:, :, 0] > 0, acov[:, :, 0], 1.0)
        scaled = acov * ratio[:, :, None]
        rho = 1.0 - (within[:, None] - scaled.mean(axis=1)) / var_plus[:, None]
    # Geyer: sums of adjacent pairs, cut at the first negative one, then
    # made non-increasing.
    pairs = rho[:, : 2 * (n // 2)].reshape(len(rho), n // 2, 2).sum(axis=2)
    alive = np.cumprod(pairs >= 0, axis=1).astype(bool)
    pairs = np.minimum.accumulate(np.where(alive, pairs, np.inf), axis=1)
    tau = -1.0 + 2.0 * np.sum(np.where(alive, pairs, 0.0), axis=1)
    total = m * n
    # The paper caps the estimate at S log10(S) for antithetic chains.
    with np.errstate(divide="ignore", invalid="ignore"):
        ess = np.minimum(total / np.maximum(tau, 1.0 / np.log10(total)), total * np.log10(total))
    return np.where(var_plus > 0, ess, np.nan)


def _tail_ess(halves):
    """The smaller ESS of the indicators of the 5% and 95% quantiles, per quantity."""
    p = halves.shape[0]
    cuts = np.quantile(halves.reshape(p, -1), [0.05, 0.95], axis=1)
    low = _ess((halves <= cuts[0][:, None, None]).astype(np.float64))
    high = _ess((halves <= cuts[1][:, None, None]).astype(np.float64))
    return np.fmin(low, high)


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
    halves, shape = _halves(chains)
    out = np.maximum(_rhat(_rank_normal(halves)), _rhat(_rank_normal(_folded(halves))))
    return _finish(out, halves, shape)


def ess_bulk(chains):
    """Bulk effective sample size: ESS of the rank-normalised split chains.

    ``chains`` is shaped as for :func:`split_rhat`; a float for (M, N), one
    value per quantity for (M, N, p).
    """
    halves, shape = _halves(chains)
    return _finish(_ess(_rank_normal(halves)), halves, shape)


def ess_tail(chains):
    """Tail effective sample size: the smaller ESS of the indicators of the 5% and 95% quantiles.

    Shapes as for :func:`ess_bulk`.
    """
    halves, shape = _halves(chains)
    return _finish(_tail_ess(halves), halves, shape)


def chain_diagnostics(chains):
    """``split_rhat``, ``ess_bulk`` and ``ess_tail`` of the same chains, sharing their work.

    Returns
    -------
    rhat, bulk, tail : float or ndarray of shape (p,)
        Exactly what the three functions return.
    """
    halves, shape = _halves(chains)
    normal = _rank_normal(halves)
    rhat = np.maximum(_rhat(normal), _rhat(_rank_normal(_folded(halves))))
    return tuple(_finish(v, halves, shape) for v in (rhat, _ess(normal), _tail_ess(halves)))
