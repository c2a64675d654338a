"""How the Laplace fit's cost grows with n and with d, one run.

Workloads (binary synthetic logistic data from ``_common.make_logistic_data``,
``LaplaceLogisticClassifier(prior_scale=1.0).fit``: MAP + covariance +
evidence; scikit-learn ``LogisticRegression(C=1.0, lbfgs, tol=1e-6)`` timed
in turns beside it at every size as the reference curve):

- cost against n at d = 20: n = 1e4, 3e4, 1e5, 3e5, 1e6 (quick: up to 3e5),
  plus 3e6 and 1e7 in the full run. The figure is the least-squares slope
  of log10(time) on log10(n) over all sizes >= 1e4; target (issue 7)
  1.0 +- 0.1 from 1e4 to 1e7 (judged only when 1e7 was run; the quick run's
  slope is indicative).
- cost against d at n = 1e5 (quick: 3e4): d = 5, 10, 20, 50, 100; the slope
  on log-log is reported (no target: Newton's Hessian is O(n d^2) per
  iteration, lbfgs's gradient O(n d)).

Each row also carries ``curve`` data (``series``, ``x``, ``y``) that
``benchmarks/run.py`` draws as the scaling PNG.

Usage: ``python benchmarks/bench_scaling.py [--quick]``.
"""

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import make_logistic_data, print_table, time_interleaved  # noqa: E402
from _suite_helpers import label, loglog_slope, suite_row  # noqa: E402

PRIOR_SCALE = 1.0
SLOPE_TARGET = (0.9, 1.1)


def _pair(n, d, quick=False, seed=0):
    from sklearn.linear_model import LogisticRegression

    from skbayeslogit import LaplaceLogisticClassifier

    X, y, _, _ = make_logistic_data(n, d, seed=seed)

    def sk():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return LogisticRegression(C=PRIOR_SCALE**2, tol=1e-6, max_iter=10_000).fit(X, y)

    def ours():
        return LaplaceLogisticClassifier(prior_scale=PRIOR_SCALE).fit(X, y)

    work = n * d
    repeats = 5 if work <= 2e6 else (3 if work <= 2e7 else 1)
    if quick:
        repeats = min(repeats, 3)
    warmup = 1 if work <= 2e7 else 0
    cpu = {}
    timed = time_interleaved(
        {"ours": ours, "sk": sk}, repeats=repeats, warmup=warmup, max_seconds=30, cpu_out=cpu
    )
    cpu_ours = float(np.median(cpu["ours"]))
    return timed["ours"][0], timed["sk"][0], timed["ours"][2], len(timed["ours"][1]), cpu_ours


def _curve_rows(kind, sizes, fixed, quick):
    rows = []
    xs, ours_t, sk_t, cpu_t = [], [], [], []
    for s in sizes:
        n, d = (s, fixed) if kind == "n" else (fixed, s)
        t_ours, t_sk, model, rounds, c_ours = _pair(n, d, quick)
        xs.append(s)
        ours_t.append(t_ours)
        sk_t.append(t_sk)
        cpu_t.append(c_ours)
        rows.append(
            suite_row(
                f"scaling laplace fit {label(n, d)}",
                t_ours,
                "sklearn lbfgs tol=1e-6",
                t_sk,
                notes=(
                    f"ours n_iter={model.n_iter_}; {rounds} rounds; per row "
                    f"{t_ours / n * 1e9:.0f} ns wall, {c_ours / n * 1e9:.0f} ns CPU"
                    if kind == "n"
                    else f"ours n_iter={model.n_iter_}; {rounds} rounds"
                ),
            )
        )
    slope, _ = loglog_slope(xs, ours_t)
    sk_slope, _ = loglog_slope(xs, sk_t)
    # Diagnostics beside the judged figure (issue 7's target is the wall
    # time over 1e4..1e7): the CPU-time slope leaves out the worker threads
    # that start at larger n, and the slope over the top decade leaves out
    # the fixed costs that dominate small fits.
    cpu_slope, _ = loglog_slope(xs, cpu_t)
    top = [i for i, x in enumerate(xs) if x >= xs[-1] / 10]
    top_slope = None
    if len(top) > 1:
        top_slope = loglog_slope([xs[i] for i in top], [ours_t[i] for i in top])[0]
    lo, hi = SLOPE_TARGET
    span = (
        f"{kind} {label(xs[0]).split('=')[1]}..{label(xs[-1]).split('=')[1]}"
        if kind == "n"
        else f"d {xs[0]}..{xs[-1]}"
    )
    judged = kind == "n" and xs[-1] >= 10_000_000
    if kind == "n":
        target = (
            "slope 1.0 +- 0.1 (1e4..1e7)" if judged else "slope 1.0 +- 0.1 (needs 1e7: full run)"
        )
    else:
        target = None
    summary = suite_row(
        f"scaling laplace fit slope vs {span}" + ("" if kind == "d" else " d=20"),
        None,
        "sklearn lbfgs slope",
        None,
        target=target,
        figure=slope,
        met=(lambda f: lo <= f <= hi) if judged else None,
        notes=(
            f"log-log least-squares slope: ours {slope:.2f}, sklearn lbfgs {sk_slope:.2f}"
            + (
                f"; not judged: ours on CPU time {cpu_slope:.2f}, ours over the top "
                f"decade {top_slope:.2f}"
                if kind == "n" and top_slope is not None
                else ""
            )
            + ("; quick run, indicative" if quick else "")
        ),
    )
    summary["curve"] = [
        {"series": f"ours vs {kind}", "x": xs, "y": ours_t, "axis": kind},
        {"series": f"sklearn lbfgs vs {kind}", "x": xs, "y": sk_t, "axis": kind},
    ]
    summary["slope_sklearn"] = sk_slope
    summary["slope_cpu"] = cpu_slope
    return rows + [summary]


def run(quick=False):
    ns = [10_000, 30_000, 100_000, 300_000]
    if not quick:
        ns += [1_000_000, 3_000_000, 10_000_000]
    ds = [5, 10, 20, 50, 100]
    rows = _curve_rows("n", ns, 20, quick)
    rows += _curve_rows("d", ds, 30_000 if quick else 100_000, quick)
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n <= 3e5, d curve at n = 3e4")
    args = parser.parse_args(argv)
    print_table(run(quick=args.quick))


if __name__ == "__main__":
    main()
