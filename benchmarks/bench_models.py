"""Tempered and multiclass Laplace fits and predictions against scikit-learn, one run.

Workloads (synthetic logistic / softmax data from ``_common.make_logistic_data``,
seeded; standard normal features, true slopes N(0, 1/d)):

- ``tempered fit``: ``TemperedLogisticClassifier(t1=0.8, t2=1.2,
  prior_scale=1.0)`` (convex Newton start, then L-BFGS on the bi-tempered
  loss) against ``LogisticRegression(C=1.0, solver="lbfgs", tol=1e-6)`` on
  the same rows, n = 1e5, d = 20, K in {2, 10} (the quick run: K = 10 at
  n = 1e4 only, not judged). The two fit different losses, so this is "what a robust fit costs
  over the ordinary one", not equal work; both stop on a gradient of the
  mean objective below 1e-6. Target: ratio <= 1 (issue 25; it was <= 3 in
  issues 3 and 7).
- ``laplace multiclass fit``: ``LaplaceLogisticClassifier(prior_scale=1.0)``
  with K = 10 classes (MAP by Newton + posterior covariance + evidence)
  against ``LogisticRegression(C=1.0)`` with "lbfgs" and "newton-cholesky"
  (tol=1e-6; both multinomial, the same objective: sum of log losses +
  ||W||^2 / 2, unpenalised intercepts), d in {10, 50}; n = 1e5 in the full
  run, n = 1e4 and d = 10 only in the quick run. The ratio is ours / the faster solver; target
  (issue 7) <= 0.7 at n >= 1e5. The coefficient difference is taken after
  centring the intercepts across classes (their common shift is not
  identified; ours sum to zero).
- ``... predict_proba``: each fitted model's ``predict_proba`` on the same
  rows against the scikit-learn lbfgs model's, timed in turns; no target.
  Ours is the moderated predictive (Laplace: pairwise moderated softmax from
  each row's K x K latent covariance) or the tempered softmax, so the work
  is not equal: these rows say what the honest probabilities cost.

Each pair is timed in turns (``_common.time_interleaved``) and the medians
are quoted.

Usage: ``python benchmarks/bench_models.py [--quick]``; ``run(quick)``
returns the rows for ``benchmarks/run.py``.
"""

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import make_logistic_data, print_table, time_interleaved  # noqa: E402
from _suite_helpers import label, suite_row  # noqa: E402

PRIOR_SCALE = 1.0
SK_TOL = 1e-6
TEMPERED_TARGET = 1.0
LAPLACE_TARGET = 0.7


def _sk(solver, tol=SK_TOL):
    from sklearn.linear_model import LogisticRegression

    max_iter = 10_000 if solver == "lbfgs" else 100
    return LogisticRegression(C=PRIOR_SCALE**2, solver=solver, tol=tol, max_iter=max_iter)


def _quiet_fit(make, X, y):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return make().fit(X, y)


# The quick run times at most this many rounds (it must stay under two
# minutes with the other scripts); set by ``run``.
_round_cap = None


def _repeats(n, d, K):
    work = n * d * K
    repeats = 5 if work <= 2e7 else 3
    return (min(repeats, _round_cap or repeats), 1)


def _params(model):
    """Coefficients with intercepts centred across classes (K > 2)."""
    coef = np.atleast_2d(model.coef_)
    b = np.ravel(model.intercept_).astype(float)
    if coef.shape[0] > 1:
        b = b - b.mean()
    return np.concatenate([coef.ravel(), b])


def bench_tempered(n, d, K, seed=0):
    from skbayeslogit import TemperedLogisticClassifier

    X, y, _, _ = make_logistic_data(n, d, K, seed=seed)

    def ours():
        return _quiet_fit(
            lambda: TemperedLogisticClassifier(t1=0.8, t2=1.2, prior_scale=PRIOR_SCALE), X, y
        )

    fns = {
        "ours": ours,
        "lbfgs": lambda: _quiet_fit(lambda: _sk("lbfgs"), X, y),
        "lbfgs_default": lambda: _quiet_fit(lambda: _sk("lbfgs", 1e-4), X, y),
    }
    repeats, warmup = _repeats(n, d, K)
    timed = time_interleaved(fns, repeats=repeats, warmup=warmup, max_seconds=60)
    t_ours, _, model = timed["ours"]
    t_sk, _, sk = timed["lbfgs"]
    t_def = timed["lbfgs_default"][0]
    judged = n >= 100_000
    fit_row = suite_row(
        f"tempered fit t1=0.8 t2=1.2 {label(n, d, K)}",
        t_ours,
        "sklearn lbfgs tol=1e-6",
        t_sk,
        target=f"ratio <= {TEMPERED_TARGET:g}" + ("" if judged else " (judged at n=1e5)"),
        met=(lambda f: f <= TEMPERED_TARGET) if judged else None,
        notes=(
            f"different losses (bounded bi-tempered vs log loss); ours n_iter={model.n_iter_} "
            f"L-BFGS after the convex Newton start, sklearn n_iter={int(np.max(sk.n_iter_))}; "
            f"sklearn default tol=1e-4: {t_def:.3f}s (ratio {t_ours / t_def:.2f}); "
            f"{len(timed['ours'][1])} rounds"
        ),
    )
    return [fit_row, _predict_row(f"tempered predict_proba {label(n, d, K)}", model, sk, X)]


def _predict_row(workload, ours, sk, X):
    """``predict_proba`` of a fitted model of ours against a scikit-learn model's, same X."""
    timed = time_interleaved(
        {"ours": lambda: ours.predict_proba(X), "sk": lambda: sk.predict_proba(X)},
        repeats=min(7, _round_cap or 7),
        warmup=1,
    )
    (t_ours, _, p_ours), (t_sk, _, p_sk) = timed["ours"], timed["sk"]
    return suite_row(
        workload,
        t_ours,
        "sklearn predict_proba",
        t_sk,
        notes=(
            "no target; max |dp| against scikit-learn's "
            f"{float(np.max(np.abs(p_ours - p_sk))):.1e}; {len(timed['ours'][1])} rounds"
        ),
    )


def bench_laplace_multiclass(n, d, K, seed=0):
    from skbayeslogit import LaplaceLogisticClassifier

    X, y, _, _ = make_logistic_data(n, d, K, seed=seed)

    fns = {
        "ours": lambda: _quiet_fit(
            lambda: LaplaceLogisticClassifier(prior_scale=PRIOR_SCALE), X, y
        ),
        "lbfgs": lambda: _quiet_fit(lambda: _sk("lbfgs"), X, y),
        "newton-cholesky": lambda: _quiet_fit(lambda: _sk("newton-cholesky"), X, y),
    }
    repeats, warmup = _repeats(n, d, K)
    timed = time_interleaved(fns, repeats=repeats, warmup=warmup, max_seconds=90)
    t_ours, _, model = timed.pop("ours")
    theta = _params(model)
    diffs = {k: float(np.max(np.abs(_params(m) - theta))) for k, (_, _, m) in timed.items()}
    fastest = min(timed, key=lambda k: timed[k][0])
    t_fast = timed[fastest][0]
    big = n >= 100_000
    fit_row = suite_row(
        f"laplace multiclass fit {label(n, d, K)}",
        t_ours,
        f"sklearn {fastest}",
        t_fast,
        target=f"ratio <= {LAPLACE_TARGET:g} (n >= 1e5)" if big else None,
        met=(lambda f: f <= LAPLACE_TARGET) if big else None,
        notes=(
            f"MAP + covariance + evidence, p={model.posterior_mean_.size}; "
            + ", ".join(f"{k} {timed[k][0]:.3f}s (|dcoef| {diffs[k]:.1e})" for k in timed)
            + f"; ours n_iter={model.n_iter_}; {len(timed[fastest][1])} rounds"
        ),
    )
    predict = _predict_row(
        f"laplace multiclass predict_proba {label(n, d, K)}", model, timed["lbfgs"][2], X
    )
    return [fit_row, predict]


def run(quick=False):
    """Tempered rows at n = 1e5, d = 20, K in {2, 10}; multiclass Laplace rows."""
    global _round_cap
    _round_cap = 3 if quick else None
    rows = bench_tempered(100_000, 20, 2)
    # The quick run uses 1e4 rows for K = 10 (indicative, about 1 s a fit
    # at 1e5 with its repeats would crowd the two minutes) and one
    # multiclass Laplace size.
    rows += bench_tempered(10_000 if quick else 100_000, 20, 10)
    if quick:
        rows += bench_laplace_multiclass(10_000, 10, 10)
    else:
        for d in (10, 50):
            rows += bench_laplace_multiclass(100_000, d, 10)
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller K = 10 workloads")
    args = parser.parse_args(argv)
    rows = run(quick=args.quick)
    print_table(rows)
    for r in rows:
        if r["target"]:
            verdict = "not judged" if r["met"] is None else ("MET" if r["met"] else "MISSED")
            print(f"{r['workload']}: {r['target']}: {r['figure']:.2f} {verdict}")


if __name__ == "__main__":
    main()
