"""Hamiltonian Monte Carlo preconditioned by the Laplace posterior.

Hamiltonian Monte Carlo (Duane, Kennedy, Pendleton & Roweth, Physics
Letters B 195, 1987; Neal, "MCMC using Hamiltonian dynamics", Handbook of
Markov Chain Monte Carlo, 2011) run in the whitened coordinates of
``importance_target``, where the Laplace approximation is N(0, I): an
identity mass matrix there is the Laplace covariance as the metric in the
parameters.
The chains run side by side (one gradient pass over the rows serves all of
them) and start at independent draws from the Laplace Gaussian, which is
already close to the posterior: the warm-up only has to tune the step size.

Step size: tuned during warm-up by dual averaging toward a mean acceptance
probability of 0.8 (Hoffman & Gelman, "The No-U-Turn sampler", JMLR 15,
2014, Sec. 3.2), then fixed. Trajectory length: drawn uniformly in
[0.5, 1.5] x pi / 2 for every iteration; pi / 2 is a quarter period of the
dynamics of N(0, I), where one trajectory makes a nearly independent draw,
and the jitter avoids the periodic orbits of a fixed length (Neal 2011,
Sec. 5.4.2.2).

Length of the run: the chains stop once the smallest tail effective sample
size over the parameters reaches a target (a sequential stopping rule on
the Monte Carlo error, as in Jones, Haran, Caffo & Neath, "Fixed-width
output analysis for Markov chain Monte Carlo", JASA 101, 2006, and Vats,
Flegal & Jones, "Multivariate output analysis for Markov chain Monte
Carlo", Biometrika 106, 2019). It is measured after ``min_draws`` draws a
chain; when short, the run is extended to the length at which the ESS,
which grows in proportion, would reach the target, and measured again, up
to ``max_draws``.
"""

import math

import numpy as np

from .convergence import ess_tail

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


class _Chains:
    """The current state of all chains: points, log densities, gradients."""

    def __init__(self, target, U):
        self.target = target
        self.U = U
        self.value, self.grad = target.value_grad(U)
        self.passes = 1

    def step(self, rng, step):
        """One HMC iteration of every chain; the mean acceptance probability and divergences."""
        length = 0.5 * math.pi * rng.uniform(0.5, 1.5)
        n_steps = min(_MAX_STEPS, max(1, math.ceil(length / step)))
        momentum = rng.standard_normal(self.U.shape)
        with np.errstate(over="ignore", invalid="ignore"):
            P = momentum + 0.5 * step * self.grad
            Uq = self.U
            for i in range(n_steps):
                Uq = Uq + step * P
                value_q, grad_q = self.target.value_grad(Uq)
                if i < n_steps - 1:
                    P += step * grad_q
            P += 0.5 * step * grad_q
            energy_change = (self.value - 0.5 * np.einsum("ij,ij->i", momentum, momentum)) - (
                value_q - 0.5 * np.einsum("ij,ij->i", P, P)
            )
        self.passes += n_steps
        energy_change[~np.isfinite(energy_change)] = np.inf
        accept_prob = np.exp(-np.maximum(energy_change, 0.0))
        take = rng.random(len(accept_prob)) < accept_prob
        self.U[take] = Uq[take]
        self.value[take] = value_q[take]
        self.grad[take] = grad_q[take]
        return float(np.mean(accept_prob)), int(np.sum(energy_change > _DIVERGENCE))


def run_chains(
    target, rng, n_chains=16, n_warmup=40, min_draws=200, max_draws=800, tail_ess=3500.0
):
    """Draws of the parameters from ``n_chains`` HMC chains.

    Parameters
    ----------
    target : WhitenedPosterior
    rng : numpy.random.Generator
        The only source of randomness (start points, momenta, trajectory
        lengths, acceptance).
    n_chains, n_warmup : int
    min_draws, max_draws : int
        Kept draws per chain, at least and at most.
    tail_ess : float or None
        Stop once every parameter's tail ESS reaches it; None keeps
        ``max_draws`` draws a chain.

    Returns
    -------
    draws : ndarray of shape (n_chains, N, p_full)
        N kept draws a chain, ``min_draws <= N <= max_draws``.
    info : dict
        ``step_size``, ``accept_rate`` (mean acceptance probability after
        warm-up), ``divergent`` (trajectories with an energy error above
        1000 nats after warm-up), ``gradient_passes``, ``warmup`` and
        ``draws_per_chain``.
    """
    dim = target.dim
    chains = _Chains(target, rng.standard_normal((n_chains, dim)))
    tuner = _StepSizeTuner(min(1.0, 1.5 * dim**-0.25))
    for _ in range(n_warmup):
        tuner.update(chains.step(rng, math.exp(tuner.log_step))[0])
    step = math.exp(tuner.log_avg)
    kept = np.empty((n_chains, max_draws, dim))
    accept_sum, divergent, done = 0.0, 0, 0
    goal = max_draws if tail_ess is None else min(min_draws, max_draws)
    while True:
        for it in range(done, goal):
            accept, diverged = chains.step(rng, step)
            kept[:, it] = chains.U
            accept_sum += accept
            divergent += diverged
        done = goal
        if done >= max_draws:
            break
        draws = target.to_theta(kept[:, :done].reshape(-1, dim)).reshape(n_chains, done, -1)
        reached = float(np.nanmin(ess_tail(draws), initial=np.inf))
        if reached >= tail_ess:
            break
        projected = done * tail_ess / max(reached, 1.0)
        goal = min(max_draws, max(done + 25, math.ceil(projected)))
    draws = target.to_theta(kept[:, :done].reshape(-1, dim)).reshape(n_chains, done, -1)
    info = {
        "step_size": step,
        "accept_rate": accept_sum / max(done, 1),
        "divergent": divergent,
        "gradient_passes": chains.passes,
        "warmup": n_warmup,
        "draws_per_chain": done,
    }
    return draws, info
