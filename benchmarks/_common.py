"""Small helpers shared by the benchmark scripts.

- ``time_call``: warm-up runs, then repeats timed with ``time.perf_counter``;
  the median is what the tables quote. ``time_interleaved`` does the same
  for several callables in turns (fair ratios on a shared, noisy machine).
- ``peak_traced_mb``: peak of the Python/numpy allocations during one call
  (``tracemalloc``; numpy reports its data buffers to it). BLAS work buffers
  are not traced; ``peak_rss_mb_subprocess`` gives the whole-process peak
  (``resource.getrusage`` max RSS) of a snippet run in a fresh interpreter.
- ``make_logistic_data``: seeded synthetic data with a logistic (binary) or
  softmax (K classes) ground truth.
- ``make_row`` / ``print_table`` / ``write_csv``: the row format every
  benchmark returns, ``{workload, ours_s, reference, reference_s, ratio,
  peak_mem_mb, notes}``, printed as a table and written under
  ``benchmarks/results/``.
"""

import csv
import os
import statistics
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

RESULTS_DIR = Path(__file__).resolve().parent / "results"
FIELDS = ["workload", "ours_s", "reference", "reference_s", "ratio", "peak_mem_mb", "notes"]


def time_call(fn, *, repeats=5, warmup=1, max_seconds=None):
    """Median wall time of ``fn()`` in seconds, and the last return value.

    Parameters
    ----------
    fn : callable with no arguments
    repeats : int
        Timed calls after the warm-up.
    warmup : int
        Untimed calls first (compilation, caches, page faults).
    max_seconds : float, optional
        Stop repeating once this much timed wall time has been spent (at
        least one timed call is always made).

    Returns
    -------
    median : float
    times : list of float
    result : whatever the last call of ``fn`` returned
    """
    result = None
    for _ in range(warmup):
        result = fn()
    times = []
    for _ in range(max(1, repeats)):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
        if max_seconds is not None and sum(times) >= max_seconds:
            break
    return statistics.median(times), times, result


# Idle time before each timed call: OpenBLAS's threads spin for 2^28 cycles
# (0.11 s at 2.45 GHz) after a multi-threaded call before they sleep.
SETTLE_SECONDS = 0.15


def time_interleaved(
    fns, *, repeats=5, warmup=1, max_seconds=None, settle=SETTLE_SECONDS, cpu_out=None
):
    """Median wall times of several callables, measured in turns.

    Round r times every callable once before round r + 1 starts, so a burst
    of load from other processes on a shared machine hits all of them alike
    instead of whichever happened to be running; the ratios of the medians
    are then fair even when the absolute times are noisy.

    The order rotates from round to round (round r starts with callable r
    mod k), so that no callable always runs right after the same other one.
    A call that follows one with multi-threaded BLAS runs while OpenBLAS's
    idle threads still spin (about 2^28 cycles, ~0.1 s) and its cache and
    fresh memory are the previous call's leftovers: with a fixed order, a
    binary Laplace fit (n = 1e5, d = 50) measured 113 ms right after
    scikit-learn's newton-cholesky and 91 ms after another fit.

    Each timed call also starts after ``settle`` seconds of idling, so that
    OpenBLAS's threads, which spin for about 0.1 s after a multi-threaded
    call, are asleep: without it a call's time depended on what ran before
    it (the same fit measured 133 ms right after scikit-learn's lbfgs, 113
    ms 0.05 s later, 83 ms 0.3 s later), and in interactive use there is
    time between calls. The pause is not counted.

    Parameters
    ----------
    fns : dict of name -> callable with no arguments
    repeats, warmup : int
        Timed and untimed rounds.
    max_seconds : float, optional
        Stop starting new rounds once this much timed wall time has been
        spent (at least one round is always timed).
    settle : float
        Idle seconds before each timed call (not counted).
    cpu_out : dict, optional
        When given, ``cpu_out[name]`` receives the process CPU time of each
        timed call (``time.process_time``: all of the process's threads,
        BLAS's own included), beside the wall times.

    Returns
    -------
    dict of name -> (median, times, last result)
    """
    results = {}
    for _ in range(warmup):
        for name, fn in fns.items():
            results[name] = fn()
    times = {name: [] for name in fns}
    spent = 0.0
    names = list(fns)
    for r in range(max(1, repeats)):
        k = r % len(names)
        for name in names[k:] + names[:k]:
            fn = fns[name]
            time.sleep(settle)
            c0 = time.process_time()
            t0 = time.perf_counter()
            results[name] = fn()
            dt = time.perf_counter() - t0
            if cpu_out is not None:
                cpu_out.setdefault(name, []).append(time.process_time() - c0)
            times[name].append(dt)
            spent += dt
        if max_seconds is not None and spent >= max_seconds:
            break
    return {name: (statistics.median(t), t, results[name]) for name, t in times.items()}


def peak_traced_mb(fn):
    """Peak traced allocation (MiB) during one call of ``fn``, above the start."""
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        base, _ = tracemalloc.get_traced_memory()
        fn()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return (peak - base) / 2**20


def peak_rss_mb_subprocess(code, env=None):
    """Max RSS (MiB) of ``python -c code`` run in a fresh interpreter.

    The snippet should build its own data; the figure includes the
    interpreter and imported libraries, so compare it with a baseline
    snippet that builds the data but does not fit.
    """
    snippet = (
        code
        + "\nimport resource, sys\n"
        + "sys.stdout.write('\\nMAXRSS_KB=%d\\n' % "
        + "resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", snippet],
        capture_output=True,
        text=True,
        check=True,
        env=env,
    ).stdout
    kb = int(out.rsplit("MAXRSS_KB=", 1)[1].split()[0])
    return kb / 1024.0


def make_logistic_data(n, d, n_classes=2, *, seed=0, coef_scale=None, dtype=np.float64):
    """Seeded features and labels from a known logistic or softmax model.

    X has independent standard normal columns (C order); the true
    coefficients are N(0, coef_scale^2) with ``coef_scale = 1 / sqrt(d)``
    by default, so the latent predictor has unit-order spread whatever d.

    Returns
    -------
    X : ndarray (n, d)
    y : ndarray (n,) of int, values 0 .. n_classes - 1
    coef : ndarray (d,) (binary) or (n_classes, d)
    intercept : float or ndarray (n_classes,)
    """
    rng = np.random.default_rng(seed)
    if coef_scale is None:
        coef_scale = 1.0 / np.sqrt(d)
    X = rng.standard_normal((n, d)).astype(dtype, copy=False)
    if n_classes == 2:
        coef = rng.normal(0.0, coef_scale, size=d)
        intercept = 0.3
        eta = X @ coef + intercept
        y = (rng.random(n) < 1.0 / (1.0 + np.exp(-eta))).astype(np.int64)
        return X, y, coef, intercept
    coef = rng.normal(0.0, coef_scale, size=(n_classes, d))
    intercept = rng.normal(0.0, 0.3, size=n_classes)
    eta = X @ coef.T + intercept
    eta -= eta.max(axis=1, keepdims=True)
    P = np.exp(eta)
    P /= P.sum(axis=1, keepdims=True)
    u = rng.random((n, 1))
    y = np.minimum((P.cumsum(axis=1) < u).sum(axis=1), n_classes - 1).astype(np.int64)
    return X, y, coef, intercept


def make_row(workload, ours_s, reference, reference_s, peak_mem_mb=None, notes=""):
    """One result row; ``ratio`` is ours / reference (below 1: we are faster)."""
    ratio = ours_s / reference_s if reference_s and reference_s > 0 else float("nan")
    return {
        "workload": workload,
        "ours_s": float(ours_s),
        "reference": reference,
        "reference_s": float(reference_s),
        "ratio": float(ratio),
        "peak_mem_mb": None if peak_mem_mb is None else float(peak_mem_mb),
        "notes": notes,
    }


def _fmt(value, spec):
    if value is None:
        return "-"
    if isinstance(value, float) and not np.isfinite(value):
        return "nan"
    return format(value, spec)


def print_table(rows, file=None):
    """A fixed-width table of result rows."""
    file = sys.stdout if file is None else file
    w = max([len("workload")] + [len(r["workload"]) for r in rows])
    wr = max([len("reference")] + [len(r["reference"]) for r in rows])
    head = (
        f"{'workload':<{w}}  {'ours_s':>9}  {'reference':<{wr}}  {'ref_s':>9}  "
        f"{'ratio':>6}  {'peak_MiB':>8}  notes"
    )
    print(head, file=file)
    print("-" * len(head), file=file)
    for r in rows:
        print(
            f"{r['workload']:<{w}}  {_fmt(r['ours_s'], '9.4f')}  {r['reference']:<{wr}}  "
            f"{_fmt(r['reference_s'], '9.4f')}  {_fmt(r['ratio'], '6.2f')}  "
            f"{_fmt(r['peak_mem_mb'], '8.1f')}  {r['notes']}",
            file=file,
        )


def write_csv(rows, name):
    """Write rows to ``benchmarks/results/<name>.csv``; returns the path."""
    RESULTS_DIR.mkdir(parents=True, exist_ok=True)
    path = RESULTS_DIR / f"{name}.csv"
    with open(path, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=FIELDS)
        writer.writeheader()
        for r in rows:
            writer.writerow({k: r.get(k) for k in FIELDS})
    return path


def blas_description():
    """Which BLAS kernel runs, and the OPENBLAS_* variables that select it."""
    try:
        from threadpoolctl import threadpool_info

        libs = [
            f"{i.get('internal_api')} {i.get('version')} {i.get('architecture')} "
            f"threads={i.get('num_threads')}"
            for i in threadpool_info()
            if i.get("user_api") == "blas"
        ]
    except ImportError:  # pragma: no cover - threadpoolctl ships with sklearn
        libs = ["threadpoolctl not installed"]
    env = {k: v for k, v in os.environ.items() if k in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")}
    return "; ".join(libs) + f"; env {env or '{}'}"
