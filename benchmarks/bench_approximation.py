"""The approximation self-check against the fit it checks, and its sampler's accuracy.

Workload 1 (issue 22): synthetic logistic data (``make_logistic_data``,
seeded), d in {10, 20}, n in {1e4, 1e5, 2e5}. The fit is
``LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)`` (a fixed scale:
one MAP solve); the check is ``check_approximation(X, y, n_draws=1000,
random_state=0)`` on the fitted model (1,000 draws from the Laplace
Gaussian, their exact log posterior, the Pareto tail fit). Both are timed in
turns (``time_interleaved``), medians quoted; ratio = check / fit. Target:
ratio <= 20 at n = 1e5, d = 20. The notes give the Pareto k.

Workload 2: scikit-learn's breast-cancer data (569 rows, 30 features
standardised), prior_scale 1 and 3. Timed: ``check_approximation(X, y,
random_state=0, refine="always")`` (the importance check, then 16 HMC
chains of 75 warm-up and 400 kept iterations) against the fit. Accuracy: its 90%
equal-tailed bounds against those of a long reference run of the same
sampler (8 chains x 4,000 kept iterations, another seed), as the largest
|difference| over the 62 bounds in units of the reference's posterior sd.
Targets: ratio <= 100, accuracy <= 0.1 sd.

Usage: ``python benchmarks/bench_approximation.py [--quick]`` (``--quick``:
d = 20 only, n up to 1e5, fewer rounds, a reference of 8 x 2,000);
``run(quick)`` returns the rows for ``run.py``.
"""

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import make_logistic_data, print_table, time_interleaved  # noqa: E402

CHECK_TARGET = 20.0
SAMPLER_TARGET = 100.0
ACCURACY_TARGET = 0.1


def bench_check(n, d, repeats):
    """One row: the check of 1,000 draws against a fixed-scale fit."""
    from skbayeslogit import LaplaceLogisticClassifier

    X, y = make_logistic_data(n, d, seed=0)[:2]
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
    timed = time_interleaved(
        {
            "check": lambda: model.check_approximation(X, y, n_draws=1000, random_state=0),
            "fit": lambda: LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y),
        },
        repeats=repeats,
    )
    t_check, _, result = timed["check"]
    t_fit = timed["fit"][0]
    ratio = t_check / t_fit
    judged = n == 100_000 and d == 20
    return {
        "workload": f"approximation check n={n:.0e} d={d} S=1000".replace("e+0", "e"),
        "ours_s": t_check,
        "reference": "our fixed-scale Laplace fit",
        "reference_s": t_fit,
        "ratio": ratio,
        "peak_mem_mb": None,
        "target": f"ratio <= {CHECK_TARGET:g}" if judged else None,
        "figure": ratio if judged else None,
        "met": (ratio <= CHECK_TARGET) if judged else None,
        "notes": f"k {result.pareto_k:.2f}, ESS {result.ess:.0f}; {repeats} rounds",
    }


def _breast_cancer():
    from sklearn.datasets import load_breast_cancer
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    return StandardScaler().fit_transform(X), y


def _reference_bounds(model, X, y, n_draws):
    """5% and 95% quantiles and sd of each parameter from a long run of the sampler."""
    from skbayeslogit._fit.hmc import run_chains

    target = model._exact_posterior(X, y, None)
    rng = np.random.default_rng(12345)
    chains, _ = run_chains(target, rng, 8, 300, n_draws, n_draws, tail_ess=None)
    draws = chains.reshape(-1, chains.shape[2])
    return np.quantile(draws, [0.05, 0.95], axis=0), draws.std(axis=0)


def bench_sampler(scale, repeats, reference_draws):
    """One row: refine="always" on the breast-cancer data, time and accuracy."""
    from skbayeslogit import LaplaceLogisticClassifier

    X, y = _breast_cancer()
    model = LaplaceLogisticClassifier(prior_scale=scale).fit(X, y)
    timed = time_interleaved(
        {
            "check": lambda: model.check_approximation(X, y, random_state=0, refine="always"),
            "fit": lambda: LaplaceLogisticClassifier(prior_scale=scale).fit(X, y),
        },
        repeats=repeats,
    )
    t_check, _, result = timed["check"]
    t_fit = timed["fit"][0]
    bounds, sd = _reference_bounds(model, X, y, reference_draws)
    table = result.coef_table(0.9)
    error = np.max(np.abs(table[["lower", "upper"]].to_numpy().T - bounds) / sd)
    laplace = model.coef_table(0.9)
    laplace_error = np.max(np.abs(laplace[["lower", "upper"]].to_numpy().T - bounds) / sd)
    ratio = t_check / t_fit
    met = ratio <= SAMPLER_TARGET and error <= ACCURACY_TARGET
    return {
        "workload": f"check + sampler breast cancer n=569 d=30 prior_scale={scale:g}",
        "ours_s": t_check,
        "reference": "our fixed-scale Laplace fit",
        "reference_s": t_fit,
        "ratio": ratio,
        "peak_mem_mb": None,
        "target": f"ratio <= {SAMPLER_TARGET:g} and bounds within {ACCURACY_TARGET} sd",
        "figure": ratio,
        "met": met,
        "notes": (
            f"k {result.pareto_k:.2f}; 90% bounds vs reference (8 x {reference_draws}): "
            f"max {error:.3f} sd (Laplace's own: {laplace_error:.3f} sd); max R-hat "
            f"{np.nanmax(result.rhat):.3f}, min bulk ESS {result.ess:.0f}, min tail ESS "
            f"{np.nanmin(result.ess_tail):.0f}; {repeats} rounds"
        ),
    }


def run(quick=False):
    """Rows of both workloads."""
    rows = []
    sizes = (
        [(10_000, 20), (100_000, 20)]
        if quick
        else [(n, d) for d in (10, 20) for n in (10_000, 100_000, 200_000)]
    )
    for n, d in sizes:
        rows.append(bench_check(n, d, 3 if quick else 5))
    for scale in (1.0, 3.0):
        rows.append(bench_sampler(scale, 3 if quick else 5, 2000 if quick else 4000))
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="d = 20 only, n <= 1e5")
    args = parser.parse_args(argv)
    rows = run(quick=args.quick)
    print_table(rows)
    for r in rows:
        if r["met"] is not None:
            print(f"{r['workload']}: {r['target']}: {'met' if r['met'] else 'MISSED'}")


if __name__ == "__main__":
    main()
