"""Start-up costs: ``import skbayeslogit`` and the first fit, cold and warm.

How it is measured (every figure from fresh interpreters, median of the
repeats):

- import: a child runs ``t = perf_counter(); import skbayeslogit;
  perf_counter() - t`` (the interpreter's own start is not included);
  reference: ``import sklearn.linear_model`` the same way, in turns.
- first fit, cold numba cache: ``NUMBA_CACHE_DIR`` points at a new empty
  temporary directory, so every kernel the fit touches is compiled; the
  child imports the package (not timed) and times its first
  ``LaplaceLogisticClassifier(prior_scale=1.0).fit`` and first
  ``TemperedLogisticClassifier().fit`` on 1,000 rows, d = 10 (binary), then a
  second fit of each (the steady-state cost of those rows). The fits run in
  that order in one child, so the tempered figures come after numba's
  once-per-process initialisation (about 0.3-0.5 s, paid by the first jitted
  call, cached or not), which the Laplace figures include.
- first fit, warm cache: the same child again with the same cache
  directory, now holding the compiled kernels (loaded, not compiled).
  Reference: scikit-learn's first ``LogisticRegression().fit`` in a fresh
  process on the same rows.

- each model's first fit in its own fresh process (issue 20): Laplace,
  probit (binary only) and tempered, binary and K = 3, n = 1,000, d = 10,
  cold then warm cache, in turns with scikit-learn's first fit in a fresh
  process on the same rows;
- the tempered first fit at n = 1e5 (binary, d = 10), cold then warm;
- the demo report (``python -m skbayeslogit report``, the whole process),
  cold then warm cache.

Targets (issue 20): import <= 1.1x; first fit cold <= 20x and warm <= 5x
scikit-learn's first fit; tempered at n = 1e5 cold <= 3x warm; demo report
cold <= 1.5x warm.  Everything runs in one loop of rounds, cold and warm and
ours and scikit-learn interleaved; medians over the rounds.

Usage: ``python benchmarks/bench_startup.py [--quick]`` (quick: fewer repeats).
"""

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import print_table  # noqa: E402
from _suite_helpers import child_env, run_snippet, snippet_json, suite_row  # noqa: E402

_IMPORT = """
import time
t0 = time.perf_counter()
import {module}  # noqa: F401
out = time.perf_counter() - t0
"""

_ONE_FIT = """
import time, warnings
import numpy as np
import {module} as lib
warnings.simplefilter('ignore')
rng = np.random.default_rng(0)
n, k = {n}, {k}
X = rng.standard_normal((n, 10))
y = (X[:, 0] + rng.standard_normal(n) > 0).astype(int) + (k > 2) * (X[:, 1] > 0.5)
t0 = time.perf_counter(); lib.{cls}({args}).fit(X, y); out = time.perf_counter() - t0
"""

_MODELS = {
    "laplace": ("skbayeslogit", "LaplaceLogisticClassifier", "prior_scale=1.0"),
    "probit": ("skbayeslogit", "ProbitClassifier", "prior_scale=1.0"),
    "tempered": ("skbayeslogit", "TemperedLogisticClassifier", ""),
    "sklearn": ("sklearn.linear_model", "LogisticRegression", ""),
}
# (model, K): probit is binary only.
_FIT_CASES = [("laplace", 2), ("laplace", 3), ("probit", 2), ("tempered", 2), ("tempered", 3)]


def _fit_snippet(model, n, k):
    module, cls, args = _MODELS[model]
    return _ONE_FIT.format(module=module, cls=cls, args=args, n=n, k=k) + snippet_json("out")


def _report_seconds(env, out):
    t0 = time.perf_counter()
    subprocess.run(
        [sys.executable, "-m", "skbayeslogit", "report", "--out", out, "--quiet"],
        env=env, check=True, capture_output=True, cwd=str(Path(__file__).resolve().parents[1]),
    )  # fmt: skip
    return time.perf_counter() - t0


def issue20_round(times, large_n):
    """One round: every case cold then warm, and scikit-learn's first fits, in turns."""
    for model, k in _FIT_CASES + [("sklearn", 2), ("sklearn", 3)]:
        cache = tempfile.mkdtemp(prefix="skbl_numba_cache_")
        try:
            env = child_env(NUMBA_CACHE_DIR=cache)
            for tag in ("cold", "warm"):
                seconds = run_snippet(_fit_snippet(model, 1000, k), env=env)
                times.setdefault((model, k, tag), []).append(seconds)
        finally:
            shutil.rmtree(cache, ignore_errors=True)
    cache = tempfile.mkdtemp(prefix="skbl_numba_cache_")
    try:
        env = child_env(NUMBA_CACHE_DIR=cache)
        for tag in ("cold", "warm"):
            seconds = run_snippet(_fit_snippet("tempered", large_n, 2), env=env)
            times.setdefault(("tempered-large", 2, tag), []).append(seconds)
        shutil.rmtree(cache, ignore_errors=True)
        os.makedirs(cache)
        for tag in ("cold", "warm"):
            out = os.path.join(cache, f"report_{tag}")
            times.setdefault(("report", 0, tag), []).append(_report_seconds(env, out))
    finally:
        shutil.rmtree(cache, ignore_errors=True)


def issue20_rows(rounds, large_n):
    times = {}
    for _ in range(rounds):
        issue20_round(times, large_n)
    med = {key: _median(values) for key, values in times.items()}
    note = f"fresh process each; median of {rounds} rounds"
    # (workload, ours, reference, reference seconds, limit of the ratio)
    cases = []
    for model, k in _FIT_CASES:
        for tag, limit in (("cold", 20.0), ("warm", 5.0)):
            workload = f"first {model} fit K={k}, {tag} cache n=1e3 d=10"
            reference = ("sklearn first fit (fresh process)", med[("sklearn", k, "cold")])
            cases.append((workload, med[(model, k, tag)], *reference, limit))
    for key, k, name, limit in (
        ("tempered-large", 2, f"first tempered fit n={large_n:.0e} d=10", 3.0),
        ("report", 0, "demo report (whole process)", 1.5),
    ):
        reference = ("the same, warm cache", med[(key, k, "warm")])
        cases.append((f"{name}, cold cache", med[(key, k, "cold")], *reference, limit))
    rows = []
    for workload, ours, reference, ref_s, limit in cases:
        rows.append(
            suite_row(
                f"startup {workload}",
                ours,
                reference,
                ref_s,
                target=f"<= {limit:g}x",
                met=lambda r, lim=limit: r <= lim,
                notes=note,
            )  # fmt: skip
        )
    return rows


def _median(values):
    return statistics.median(values)


def import_times(repeats):
    ours, ref = [], []
    for _ in range(repeats):
        ours.append(run_snippet(_IMPORT.format(module="skbayeslogit") + snippet_json("out")))
        ref.append(
            run_snippet(_IMPORT.format(module="sklearn.linear_model") + snippet_json("out"))
        )
    return ours, ref


def run(quick=False):
    n_imp = 2 if quick else 9
    ours, ref = import_times(n_imp)
    rows = [
        suite_row(
            "startup import skbayeslogit",
            _median(ours),
            "import sklearn.linear_model",
            _median(ref),
            target="<= 1.1x",
            met=lambda r: r <= 1.1,
            notes=(
                f"fresh interpreter each, median of {n_imp}; ours range "
                f"{min(ours):.3f}..{max(ours):.3f}s (includes numpy/scipy/sklearn/pandas)"
            ),
        )
    ]
    rows += issue20_rows(1 if quick else 3, int(2e4) if quick else int(1e5))
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args(argv)
    print_table(run(quick=args.quick))


if __name__ == "__main__":
    main()
