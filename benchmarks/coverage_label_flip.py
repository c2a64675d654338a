"""Coverage of the label-flip model's coefficient intervals when the rate is fitted.

Simulation with a known truth (the one of tests/test_labelflip.py): two
standard-normal features, P(true y = 1) = sigmoid(1.5 x1 - 1.0 x2 + 0.3),
and every label flipped with probability 0.15; n = 1,000 rows a seed.
``LabelFlipLogisticClassifier(flip_rate="auto")`` is fitted on each seed and
two posteriors are scored:

- "plug-in": the Laplace posterior at the evidence-chosen rate, as if that
  rate were known (a refit with ``flip_rate=flip_rate_`` at the same
  ``prior_scale_``);
- "averaged": the model's own posterior, averaged over the rate.

For each, the share of (seed, parameter) pairs whose true value lies within
+-1 posterior sd (nominal 68.3%) and inside the 90% interval (nominal 90%),
with the binomial 99% band of the count for the seeds x parameters pairs
(the parameters of one seed are correlated, which widens the true spread a
little). Run: ``python benchmarks/coverage_label_flip.py [--seeds 40]
[--prior-scale 10|auto]``.
"""

import argparse
import time

import numpy as np
from scipy.special import expit
from scipy.stats import binom, norm

from skbayeslogit import LabelFlipLogisticClassifier

TRUE_COEF, TRUE_INTERCEPT, TRUE_RATE, N_ROWS = np.array([1.5, -1.0]), 0.3, 0.15, 1000


def simulate(seed, n=N_ROWS, rate=TRUE_RATE):
    """X, recorded y and the flipped rows of one seed."""
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((n, 2))
    y = (rng.random(n) < expit(X @ TRUE_COEF + TRUE_INTERCEPT)).astype(int)
    flipped = rng.random(n) < rate
    y[flipped] = 1 - y[flipped]
    return X, y, flipped


def hits(mean, cov, truth):
    """(within 1 sd, within the 90% interval) per parameter, as 0/1 arrays."""
    sd = np.sqrt(np.diag(cov))
    z = np.abs(mean - truth) / sd
    return (z <= 1.0).astype(int), (z <= norm.ppf(0.95)).astype(int)


def run(seeds, prior_scale):
    """Counts of hits over ``seeds`` seeds: {posterior: (one sd, 90%)}, and the rates."""
    truth = np.r_[TRUE_COEF, TRUE_INTERCEPT]
    counts = {"plug-in": np.zeros((2, 3), int), "averaged": np.zeros((2, 3), int)}
    rates = []
    for seed in range(seeds):
        X, y, _ = simulate(seed)
        model = LabelFlipLogisticClassifier(prior_scale=prior_scale).fit(X, y)
        known = LabelFlipLogisticClassifier(
            flip_rate=model.flip_rate_, prior_scale=model.prior_scale_
        ).fit(X, y)
        counts["averaged"] += np.array(hits(model.posterior_mean_, model.posterior_cov_, truth))
        counts["plug-in"] += np.array(hits(known.posterior_mean_, known.posterior_cov_, truth))
        rates.append((model.flip_rate_, model.flip_rate_sd_))
    return counts, np.array(rates)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=40)
    parser.add_argument("--prior-scale", default="10")
    args = parser.parse_args()
    prior_scale = "auto" if args.prior_scale == "auto" else float(args.prior_scale)
    start = time.perf_counter()
    counts, rates = run(args.seeds, prior_scale)
    seconds = time.perf_counter() - start
    print(
        f"seeds {args.seeds}, n = {N_ROWS}, true rate {TRUE_RATE}, prior_scale {prior_scale}; "
        f"flip_rate_ mean {rates[:, 0].mean():.3f} (sd over seeds {rates[:, 0].std():.3f}), "
        f"flip_rate_sd_ mean {rates[:, 1].mean():.3f}; {seconds:.1f} s"
    )
    for level, nominal in ((0, norm.cdf(1) - norm.cdf(-1)), (1, 0.9)):
        lo, hi = binom.ppf([0.005, 0.995], args.seeds, nominal) / args.seeds
        label = "+-1 sd" if level == 0 else "90% interval"
        print(f"{label}: nominal {nominal:.3f}, 99% band per parameter [{lo:.3f}, {hi:.3f}]")
        for name, count in counts.items():
            shares = ", ".join(f"{c / args.seeds:.3f}" for c in count[level])
            total = count[level].sum() / (3 * args.seeds)
            print(f"  {name:9s} w1, w2, b: {shares}; all: {total:.3f}")


if __name__ == "__main__":
    main()
