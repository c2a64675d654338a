"""Large data: a Laplace fit from a memory-mapped file and on a dask LocalCluster.

n = 2e7 rows, d = 20 (quick: n = 2e6), written in blocks to a ``.npy`` file
under a temporary directory that is deleted afterwards. Three fits of the same
problem (``LaplaceLogisticClassifier(prior_scale=1.0)``):

- ``memmap``: ``np.load(path, mmap_mode="r")``, row blocks of the default size;
- ``dask``: a ``LocalCluster`` of 2 worker processes (1 thread each, loopback),
  X a dask array whose chunks each read their rows from the same file (so no
  worker ever holds the whole of X);
- the reference: the in-memory fit of the same array loaded whole.

Reported per fit: wall time, peak memory per process and passes over the data.
Peak memory is the peak of the process's anonymous resident memory (RssAnon,
sampled every 20 ms, minus its value before the fit): pages of the memory
map that the kernel keeps in its page cache are file-backed, reclaimable and
not counted. For dask it is the largest of the two workers' peaks. A pass is
one sweep over all rows: a Newton or loss evaluation, the validation pass,
or the gather of the warm-start subsample.

Usage: ``python benchmarks/bench_large.py [--quick]``.
"""

import argparse
import os
import shutil
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import make_row, print_table, write_csv  # noqa: E402

D = 20
WRITE_ROWS = 500_000


def _rss_anon_mb():
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("RssAnon:"):
                return int(line.split()[1]) / 1024.0
    return float("nan")


class _PeakSampler:
    """Peak RssAnon of this process above its level at start, in MiB."""

    def __init__(self):
        self.base = _rss_anon_mb()
        self.peak = self.base
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._loop, daemon=True)
        self._thread.start()

    def _loop(self):
        while not self._stop.wait(0.02):
            self.peak = max(self.peak, _rss_anon_mb())

    def stop(self):
        self._stop.set()
        self._thread.join()
        self.peak = max(self.peak, _rss_anon_mb())
        return self.peak - self.base


def _start_worker_sampler():
    import builtins

    builtins._skbl_sampler = _PeakSampler()


def _stop_worker_sampler():
    import builtins

    return builtins._skbl_sampler.stop()


def _write_data(directory, n, seed=0):
    """X (n, d) float64 and y (n,) int8 as .npy files, written block by block."""
    rng = np.random.default_rng(seed)
    beta = rng.standard_normal(D) / np.sqrt(D)
    xp, yp = os.path.join(directory, "X.npy"), os.path.join(directory, "y.npy")
    X = np.lib.format.open_memmap(xp, mode="w+", dtype=np.float64, shape=(n, D))
    y = np.lib.format.open_memmap(yp, mode="w+", dtype=np.int8, shape=(n,))
    for start in range(0, n, WRITE_ROWS):
        stop = min(start + WRITE_ROWS, n)
        Xb = rng.standard_normal((stop - start, D))
        X[start:stop] = Xb
        y[start:stop] = rng.random(stop - start) < 1.0 / (1.0 + np.exp(-(Xb @ beta - 0.3)))
    X.flush()
    y.flush()
    del X, y
    return xp, yp


def _count_passes():
    """Wrap the sources' pass methods with a shared counter."""
    from skbayeslogit._linear import sources as _sources

    counter = {"passes": 0}
    for cls in (_sources.MemmapSource, _sources.DaskSource):
        for name in ("stats", "reduce", "take"):
            original = getattr(cls, name)

            def wrapped(self, *a, _original=original, **k):
                counter["passes"] += 1
                return _original(self, *a, **k)

            setattr(cls, name, wrapped)
    return counter


def _read_rows(path, start, stop):
    # A task's own read of its rows: only this chunk is copied into memory.
    return np.array(np.load(path, mmap_mode="r")[start:stop])


def run(quick=False):
    """Rows of the benchmark table (see the module docstring)."""
    from skbayeslogit import LaplaceLogisticClassifier

    n = 2_000_000 if quick else 20_000_000
    label = f"n={n:.0e} d={D}".replace("e+0", "e")
    rows = []
    tmp = tempfile.mkdtemp(prefix="skbl_large_")
    try:
        xp, yp = _write_data(tmp, n)
        counter = _count_passes()
        y = np.load(yp)
        gb = n * D * 8 / 2**30

        # memmap
        counter["passes"] = 0
        sampler = _PeakSampler()
        t0 = time.perf_counter()
        m_mm = LaplaceLogisticClassifier(prior_scale=1.0).fit(np.load(xp, mmap_mode="r"), y)
        t_mm = time.perf_counter() - t0
        peak_mm = sampler.stop()
        passes_mm = counter["passes"]

        # dask
        import dask
        import dask.array as da
        from dask.distributed import Client, LocalCluster

        chunk = 1_000_000
        with (
            LocalCluster(
                n_workers=2,
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
            ) as cluster,
            Client(cluster) as client,
        ):
            parts = [
                da.from_delayed(
                    dask.delayed(_read_rows)(xp, a, min(a + chunk, n)),
                    shape=(min(a + chunk, n) - a, D),
                    dtype=np.float64,
                )
                for a in range(0, n, chunk)
            ]
            dX = da.concatenate(parts, axis=0)
            dy = da.from_array(y, chunks=(chunk,))
            dy = client.persist(dy)
            client.run(_start_worker_sampler)
            counter["passes"] = 0
            t0 = time.perf_counter()
            m_dk = LaplaceLogisticClassifier(prior_scale=1.0).fit(dX, dy)
            t_dk = time.perf_counter() - t0
            peaks = client.run(_stop_worker_sampler)
            passes_dk = counter["passes"]
            peak_dk = max(peaks.values())

        # reference: in memory
        X = np.load(xp)
        sampler = _PeakSampler()
        t0 = time.perf_counter()
        m_in = LaplaceLogisticClassifier(prior_scale=1.0).fit(X, y)
        t_in = time.perf_counter() - t0
        peak_in = sampler.stop() + X.nbytes / 2**20  # X itself, loaded before
        del X

        def dev(m):
            return float(np.max(np.abs(m.coef_ - m_in.coef_)) / np.max(np.abs(m_in.coef_)))

        rows.append(
            make_row(
                f"laplace fit memmap {label}",
                t_mm,
                "in-memory fit",
                t_in,
                peak_mem_mb=peak_mm,
                notes=(
                    f"X {gb:.2f} GiB on disk; {passes_mm} passes; n_iter={m_mm.n_iter_}; "
                    f"rel. dev. from in-memory {dev(m_mm):.1e}; in-memory peak "
                    f"{peak_in:.0f} MiB incl. X"
                ),
            )
        )
        rows.append(
            make_row(
                f"laplace fit dask 2 workers {label}",
                t_dk,
                "in-memory fit",
                t_in,
                peak_mem_mb=peak_dk,
                notes=(
                    f"chunks of {chunk} rows read from file per task; {passes_dk} passes; "
                    f"n_iter={m_dk.n_iter_}; rel. dev. {dev(m_dk):.1e}; worker peaks "
                    + ", ".join(f"{v:.0f}" for v in peaks.values())
                    + " MiB"
                ),
            )
        )
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    return rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n = 2e6 instead of 2e7")
    args = parser.parse_args(argv)
    rows = run(quick=args.quick)
    print_table(rows)
    write_csv(rows, "large_quick" if args.quick else "large")


if __name__ == "__main__":
    main()
