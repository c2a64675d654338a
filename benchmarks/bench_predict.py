"""predict_proba of every model against the plug-in with the same coefficients, one run.

Each model is fitted once on the first 20,000 rows of seeded synthetic data
(``_common.make_logistic_data``; prior_scale 1), then its ``predict_proba``
on all n rows is timed in turns (``_common.time_interleaved``) with the
plug-in reference: scikit-learn's ``LogisticRegression.predict_proba`` on
a model whose ``coef_``, ``intercept_`` and ``classes_`` are set to ours
(binary: sigmoid of ``X @ coef + b``; multiclass: softmax of it). Medians
are quoted; the ratio is ours / plug-in.

Workloads and targets (issue 25):

- ``laplace`` binary, n = 1e5 and 1e6 (quick: 1e5), d in {10, 20, 50}: the
  moderated predictive sigma(kappa(v) m) with the latent variance of every
  row. Target <= 1.5.
- ``probit`` binary, the same sizes at d = 20: Phi(m / sqrt(1 + v)).
  Target <= 1.5.
- ``laplace multiclass`` K = 10, n = 1e5, d in {10, 50}: the pairwise
  moderated softmax from each row's K x K latent covariance. Target <= 2.
- ``tempered`` K in {2, 10}, n = 1e5, d = 20: the tempered softmax at
  t2 = 1.2 (its normaliser per row). Target <= 2.

The quick run: binary Laplace and probit at d = 20, multiclass at d = 10,
tempered K = 2, all at n = 1e5, 3 rounds.

Usage: ``python benchmarks/bench_predict.py [--quick]``; ``run(quick)``
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

FIT_ROWS = 20_000
BINARY_TARGET = 1.5
MULTICLASS_TARGET = 2.0
TEMPERED_TARGET = 2.0

_repeats = 7


def _plug_in(model, d):
    """A scikit-learn model holding ``model``'s coefficients."""
    from sklearn.linear_model import LogisticRegression

    sk = LogisticRegression()
    sk.coef_ = np.array(model.coef_, dtype=float)
    sk.intercept_ = np.array(model.intercept_, dtype=float)
    sk.classes_ = np.array(model.classes_)
    sk.n_features_in_ = d
    return sk


def _fitted(make, X, y):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return make().fit(X[:FIT_ROWS], y[:FIT_ROWS])


def bench_case(name, make, n, d, K, target):
    """One row: ``make()``'s predict_proba against the plug-in on n rows."""
    X, y, _, _ = make_logistic_data(n, d, K, seed=0)
    model = _fitted(make, X, y)
    sk = _plug_in(model, d)
    timed = time_interleaved(
        {"ours": lambda: model.predict_proba(X), "plug-in": lambda: sk.predict_proba(X)},
        repeats=_repeats,
        warmup=1,
    )
    (t_ours, times, p_ours), (t_ref, _, p_ref) = timed["ours"], timed["plug-in"]
    return suite_row(
        f"{name} predict_proba {label(n, d, K)}",
        t_ours,
        "plug-in (sklearn predict_proba, same coef)",
        t_ref,
        target=f"ratio <= {target:g}",
        met=lambda f: f <= target,
        notes=(
            f"max |p - plug-in| {float(np.max(np.abs(p_ours - p_ref))):.1e}; {len(times)} rounds"
        ),
    )


def _cases(quick):
    from skbayeslogit import (
        LaplaceLogisticClassifier,
        ProbitClassifier,
        TemperedLogisticClassifier,
    )

    def laplace():
        return LaplaceLogisticClassifier(prior_scale=1.0)

    def probit():
        return ProbitClassifier(prior_scale=1.0)

    def tempered():
        return TemperedLogisticClassifier(t1=0.8, t2=1.2, prior_scale=1.0)

    if quick:
        # Four rows at n = 1e5: the quick suite must stay near two minutes.
        yield "laplace", laplace, 100_000, 20, 2, BINARY_TARGET
        yield "probit", probit, 100_000, 20, 2, BINARY_TARGET
        yield "laplace multiclass", laplace, 100_000, 10, 10, MULTICLASS_TARGET
        yield "tempered", tempered, 100_000, 20, 2, TEMPERED_TARGET
        return
    for n in (100_000, 1_000_000):
        for d in (10, 20, 50):
            yield "laplace", laplace, n, d, 2, BINARY_TARGET
        yield "probit", probit, n, 20, 2, BINARY_TARGET
    for d in (10, 50):
        yield "laplace multiclass", laplace, 100_000, d, 10, MULTICLASS_TARGET
    for K in (2, 10):
        yield "tempered", tempered, 100_000, 20, K, TEMPERED_TARGET


def run(quick=False):
    """All rows (quick: four rows at n = 1e5, 3 rounds)."""
    global _repeats
    _repeats = 3 if quick else 7
    return [bench_case(*case) for case in _cases(quick)]


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="four rows at n = 1e5, 3 rounds")
    args = parser.parse_args(argv)
    rows = run(quick=args.quick)
    print_table(rows)
    for r in rows:
        verdict = "MET" if r["met"] else "MISSED"
        print(f"{r['workload']}: {r['target']}: {r['figure']:.2f} {verdict}")


if __name__ == "__main__":
    main()
