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

No numeric target is set by the issues; the rows report the figures.

Usage: ``python benchmarks/bench_startup.py [--quick]`` (quick: fewer repeats).
"""

import argparse
import shutil
import statistics
import sys
import tempfile
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

_FIRST_FIT = """
import time, warnings
import numpy as np
import skbayeslogit, sklearn.linear_model
from skbayeslogit import LaplaceLogisticClassifier, TemperedLogisticClassifier
warnings.simplefilter('ignore')
rng = np.random.default_rng(0)
X = rng.standard_normal((1000, 10)); y = (X[:, 0] + rng.standard_normal(1000) > 0).astype(int)
out = {}
for name, make in (('laplace', lambda: LaplaceLogisticClassifier(prior_scale=1.0)),
                   ('tempered', lambda: TemperedLogisticClassifier()),
                   ('sklearn', lambda: sklearn.linear_model.LogisticRegression())):
    t0 = time.perf_counter(); make().fit(X, y); first = time.perf_counter() - t0
    t0 = time.perf_counter(); make().fit(X, y); second = time.perf_counter() - t0
    out[name] = [first, second]
"""


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


def first_fit_times(repeats):
    """Per repeat: a cold run in a new cache directory, then a warm run in it."""
    cold, warm = [], []
    for _ in range(repeats):
        cache = tempfile.mkdtemp(prefix="skbl_numba_cache_")
        try:
            env = child_env(NUMBA_CACHE_DIR=cache)
            cold.append(run_snippet(_FIRST_FIT + snippet_json("out"), env=env))
            warm.append(run_snippet(_FIRST_FIT + snippet_json("out"), env=env))
        finally:
            shutil.rmtree(cache, ignore_errors=True)
    return cold, warm


def run(quick=False):
    n_imp = 2 if quick else 9
    n_fit = 1 if quick else 3
    ours, ref = import_times(n_imp)
    rows = [
        suite_row(
            "startup import skbayeslogit",
            _median(ours),
            "import sklearn.linear_model",
            _median(ref),
            notes=(
                f"fresh interpreter each, median of {n_imp}; ours range "
                f"{min(ours):.3f}..{max(ours):.3f}s (includes numpy/scipy/sklearn/numba/pandas)"
            ),
        )
    ]
    cold, warm = first_fit_times(n_fit)
    for name in ("laplace", "tempered"):
        for tag, runs in (("cold", cold), ("warm", warm)):
            first = _median([r[name][0] for r in runs])
            second = _median([r[name][1] for r in runs])
            sk_first = _median([r["sklearn"][0] for r in runs])
            rows.append(
                suite_row(
                    f"startup first {name} fit, {tag} numba cache n=1e3 d=10",
                    first,
                    "sklearn first fit",
                    sk_first,
                    notes=(
                        f"second fit in the same process {second:.4f}s; "
                        f"median of {n_fit} fresh processes"
                        + (
                            "; NUMBA_CACHE_DIR a new empty dir"
                            if tag == "cold"
                            else "; same cache dir, second process"
                        )
                    ),
                )
            )
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args(argv)
    print_table(run(quick=args.quick))


if __name__ == "__main__":
    main()
