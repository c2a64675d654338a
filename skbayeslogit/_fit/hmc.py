"""Hamiltonian Monte Carlo preconditioned by the Laplace posterior.

Hamiltonian Monte Carlo (Duane, Kennedy, Pendleton & Roweth, Physics
Letters B 195, 1987; Neal, "MCMC using Hamiltonian dynamics", Handbook of
Markov Chain Monte Carlo, 2011) run in the whitened coordinates of
``importance_target``, where the Laplace approximation is N(0, I): an
identity mass matrix there is the Laplace covariance as the metric in the
parameters.
The chains run side by side (one gradient pass over the rows serves all of
them) and start at independent draws from the Laplace Gaussian.

Step size: tuned during warm-up by dual averaging toward a mean acceptance
probability of 0.8 (Hoffman & Gelman, "The No-U-Turn sampler", JMLR 15,
2014, Sec. 3.2), then fixed. Trajectory length: drawn uniformly in
[0.5, 1.5] x pi / 2 for every iteration; pi / 2 is a quarter period of the
dynamics of N(0, I), where one trajectory makes a nearly independent draw,
and the jitter avoids the periodic orbits of a fixed length (Neal 2011,
Sec. 5.4.2.2).
"""

import math

import numpy as np

_TARGET_ACCEPT = 0.8
_MAX_STEPS = 100  # leapfrog steps per trajectory, at most
_DIVERGENCE = 1000.0  # energy error (nats) counted as a divergent trajectory


class _StepSizeTuner:
    """Dual averaging of log step size (Hoffman & Gelman 2014, Algorithm 5 constants)."""

    def __init__(self, step):
        self.mu = math.log(10.0 * step)
        self.log_step = math.log(step)
        self.log_avg = 0.0
        self.h_bar = 0.0
        self.t = 0

    def update(self, accept):
        self.t += 1
        t = self.t
        frac = 1.0 / (t + 10.0)
        self.h_bar = (1.0 - frac) * self.h_bar + frac * (_TARGET_ACCEPT - accept)
        self.log_step = self.mu - math.sqrt(t) / 0.05 * self.h_bar
        weight = t**-0.75
        self.log_avg = weight * self.log_step + (1.0 - weight) * self.log_avg


def _trajectory(target, U, value, grad, step, n_steps, momentum):
    """Leapfrog from (U, momentum) for all chains; the end point and its energy terms."""
    P = momentum + 0.5 * step * grad
    Uq = U
    for i in range(n_steps):
        Uq = Uq + step * P
        value_q, grad_q = target.value_grad(Uq)
        if i < n_steps - 1:
            P = P + step * grad_q
    P = P + 0.5 * step * grad_q
    return Uq, value_q, grad_q, P


def run_chains(target, rng, n_chains=4, n_warmup=300, n_draws=500):
    """Draws of the parameters from ``n_chains`` HMC chains.

    Parameters
    ----------
    target : WhitenedPosterior
    rng : numpy.random.Generator
        The only source of randomness (start points, momenta, trajectory
        lengths, acceptance).
    n_chains, n_warmup, n_draws : int

    Returns
    -------
    draws : ndarray of shape (n_chains, n_draws, p_full)
    info : dict
        ``step_size``, ``accept_rate`` (mean acceptance probability after
        warm-up), ``divergent`` (trajectories with an energy error above
        1000 nats after warm-up), ``gradient_passes``.
    """
    dim = target.dim
    U = rng.standard_normal((n_chains, dim))
    value, grad = target.value_grad(U)
    tuner = _StepSizeTuner(min(1.0, 1.5 * dim**-0.25))
    kept = np.empty((n_chains, n_draws, dim))
    accept_sum, divergent, passes = 0.0, 0, 1
    for it in range(n_warmup + n_draws):
        warm = it < n_warmup
        step = math.exp(tuner.log_step if warm else tuner.log_avg)
        length = 0.5 * math.pi * rng.uniform(0.5, 1.5)
        n_steps = min(_MAX_STEPS, max(1, math.ceil(length / step)))
        momentum = rng.standard_normal((n_chains, dim))
        with np.errstate(over="ignore", invalid="ignore"):
            Uq, value_q, grad_q, P = _trajectory(target, U, value, grad, step, n_steps, momentum)
            energy_change = (value - 0.5 * np.sum(momentum**2, axis=1)) - (
                value_q - 0.5 * np.sum(P**2, axis=1)
            )
        passes += n_steps
        energy_change = np.where(np.isfinite(energy_change), energy_change, np.inf)
        accept_prob = np.exp(-np.maximum(energy_change, 0.0))
        take = rng.random(n_chains) < accept_prob
        U = np.where(take[:, None], Uq, U)
        value = np.where(take, value_q, value)
        grad = np.where(take[:, None], grad_q, grad)
        if warm:
            tuner.update(float(np.mean(accept_prob)))
        else:
            kept[:, it - n_warmup] = U
            accept_sum += float(np.mean(accept_prob))
            divergent += int(np.sum(energy_change > _DIVERGENCE))
    draws = target.to_theta(kept.reshape(-1, dim)).reshape(n_chains, n_draws, -1)
    info = {
        "step_size": math.exp(tuner.log_avg),
        "accept_rate": accept_sum / max(n_draws, 1),
        "divergent": divergent,
        "gradient_passes": passes,
    }
    return draws, info
