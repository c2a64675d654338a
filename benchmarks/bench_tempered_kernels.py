"""Benchmark: the numba tempered-softmax normaliser against numpy.

The reference is a vectorised numpy implementation of the *same* algorithm as
:mod:`skbayeslogit._kernels.tempered_rows` (row shift, the fixed point of Amid et al.,
NeurIPS 2019, for t > 1 with the same switch rule, then bracketed Newton on
log_t(sum p) -- plain Newton for K = 2 -- with the same stopping rules and the
same integer-power evaluation of exp_t when 1/(1 - t) is an integer),
iterating all unconverged rows together.  Timings are medians over repeats
after a warm-up call (numba compilation excluded).

Run ``python benchmarks/bench_tempered_kernels.py [--quick]``; a suite runner
can call :func:`run`.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from skbayeslogit.tempered_functions import tempered_normaliser

_EPS = np.finfo(np.float64).eps
_HUGE = np.finfo(np.float64).max


def _integer_power(t):
    if t == 1.0:
        return 0
    r = 1.0 / (1.0 - t)
    n = round(r)
    return n if (n != 0 and abs(n) <= 16 and abs(r - n) <= 8 * _EPS * abs(r)) else 0


def _ipow(x, n):
    result = x.copy() if n & 1 else np.ones_like(x)
    for bit in (2, 4, 8, 16):
        x = x * x
        if n & bit:
            result *= x
    return result


def _texp(z, t, n):
    """(p, p**t) for z = (1 - t)(d - lam) > -1, as in the kernel."""
    if n > 0:
        x = 1.0 + z
        q = _ipow(x, n - 1)
        return q * x, q
    if n < 0:
        y = 1.0 / (1.0 + z)
        p = _ipow(y, -n)
        return p, p * y
    p = np.exp(np.log1p(z) / (1.0 - t))
    return p, p / (1.0 + z)


def _f_and_slope(d, lam, t, n):
    z = (1.0 - t) * (d - lam[:, None])
    inside = z > -1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        p, slope = _texp(np.where(inside, z, 0.0), t, n)
        p = np.where(inside, p, 0.0)
        slope = np.where(inside, slope, 0.0)
    return p.sum(axis=1) - 1.0, slope.sum(axis=1)


def _fixed_point(d, t, n, maxiter=50, spare=3.0):
    tm1 = t - 1.0
    n = d.shape[0]
    lam = np.zeros(n)
    prev = np.full(n, np.inf)
    active = np.arange(n)
    for _ in range(maxiter):
        if active.size == 0:
            break
        s = 1.0 + tm1 * lam[active]
        z_sum = _texp(-tm1 * d[active] / s[:, None], t, n)[0].sum(axis=1)
        new = np.expm1(tm1 * np.log(z_sum)) / tm1
        step = new - lam[active]
        lam[active] = new
        target = 4.0 * _EPS * new
        stop = step <= target
        with np.errstate(divide="ignore", invalid="ignore"):
            rate = step / prev[active]
            projected = np.log(target / step) / np.log(rate)
        stop |= (rate >= 1.0) | ((rate > 0.0) & (projected > spare))
        prev[active] = step
        active = active[~stop]
    return lam


def normaliser_numpy(a, t, maxiter=200):
    """Tempered-softmax normaliser, shape (n,), of activations a (n, K)."""
    a = np.asarray(a, dtype=np.float64)
    m = a.max(axis=1)
    d = a - m[:, None]
    n, k = d.shape
    if t == 1.0:
        return m + np.log(np.exp(d).sum(axis=1))
    ipow = _integer_power(t)
    lam = _fixed_point(d, t, ipow) if (t > 1.0 and k > 2) else np.zeros(n)
    hi = np.full(n, min(np.expm1((t - 1.0) * np.log(k)) / (t - 1.0), _HUGE))
    lo = np.zeros(n)
    tol = 4.0 * _EPS * (np.sqrt(k) + 1.0)
    active = np.arange(n)
    for _ in range(maxiter):
        if active.size == 0:
            break
        la = lam[active]
        f, fp = _f_and_slope(d[active], la, t, ipow)
        done = np.abs(f) <= tol
        lo_a = np.where(f > 0, la, lo[active])
        hi_a = np.where(f > 0, hi[active], la)
        with np.errstate(divide="ignore", invalid="ignore"):
            if k == 2:
                new = np.where(fp > 0, la + f / fp, lo_a - 1.0)
            else:
                # Newton on log_t(sum p), as in the kernel.
                big_f = f + 1.0
                e = np.expm1((1.0 - t) * np.log(big_f))
                new = la + big_f * e / ((1.0 - t) * (1.0 + e) * fp)
                new = np.where((fp > 0) & (f > -1.0), new, lo_a - 1.0)
        bad = ~((new > lo_a) & (new < hi_a))
        new = np.where(bad, lo_a + 0.5 * (hi_a - lo_a), new)
        done |= (np.abs(new - la) <= 2 * _EPS * np.abs(la)) | (hi_a - lo_a <= 4 * _EPS * hi_a)
        lam[active] = np.where(np.abs(f) <= tol, la, new)
        lo[active] = lo_a
        hi[active] = hi_a
        active = active[~done]
    return m + lam


def _median_time(func, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def run(quick: bool = False) -> list[dict]:
    """Time both implementations; return one dict per workload.

    Keys: ``workload``, ``ours_s``, ``reference_s``, ``ratio``
    (reference / ours), ``rows_per_s_ours``, ``rows_per_s_reference``,
    ``max_abs_diff``.
    """
    rng = np.random.default_rng(0)
    repeats = 3 if quick else 7
    rows = []
    for k in (2, 10, 1000):
        # K = 1000 at n = 1e5 is 800 MB per temporary in the numpy reference;
        # 1e4 rows keep it at 80 MB and the per-row rate is what is compared.
        # The quick run keeps the full rows for K = 2 and 10 (their numpy
        # reference takes 0.1-0.3 s): at 1e4 rows and K = 2 a call is below
        # PARALLEL_MIN_ELEMENTS and runs on one core (59 ns a row, as at
        # 1e5 serially), where the full run's rows use two (8.8x numpy in
        # a quick run there, against 23x).
        n = 10_000 if k == 1000 else 100_000
        if quick and k == 1000:
            n //= 10
        a = rng.normal(scale=3.0, size=(n, k))
        for t in (0.8, 1.2):
            tempered_normaliser(a[:2], t)  # compile (or load from cache)
            ours = _median_time(lambda a=a, t=t: tempered_normaliser(a, t), repeats)
            ref = _median_time(lambda a=a, t=t: normaliser_numpy(a, t), max(1, repeats // 2))
            diff = float(np.max(np.abs(tempered_normaliser(a, t) - normaliser_numpy(a, t))))
            rows.append(
                {
                    "workload": f"normaliser n={n} K={k} t={t}",
                    "ours_s": ours,
                    "reference_s": ref,
                    "ratio": ref / ours,
                    "rows_per_s_ours": n / ours,
                    "rows_per_s_reference": n / ref,
                    "max_abs_diff": diff,
                }
            )
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--quick", action="store_true", help="fewer repeats; K = 1000 on a tenth of the rows"
    )
    args = parser.parse_args(argv)
    print(
        f"{'workload':<36} {'ours rows/s':>12} {'numpy rows/s':>13} {'ratio':>7} {'max|diff|':>10}"
    )
    for r in run(args.quick):
        print(
            f"{r['workload']:<36} {r['rows_per_s_ours']:>12.3g} "
            f"{r['rows_per_s_reference']:>13.3g} {r['ratio']:>7.1f} {r['max_abs_diff']:>10.2g}"
        )


if __name__ == "__main__":
    main()
