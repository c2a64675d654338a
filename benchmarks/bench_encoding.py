"""From a CSV file to a fitted model: reading, roles, encoding and a Laplace fit.

Workload: seeded logistic data written to a CSV in a temporary folder, n in
{2e4, 2e5} rows. "mixed": 8 standard-normal numeric columns and 3 text
categorical columns with 4, 8 and 15 levels (uniform), one-hot encoded with
every level kept (35 design columns); "numeric": the same 8 numeric columns
only. The label is drawn from a logistic model on both kinds of column.
A third file, "pre-encoded", holds the same 35 design columns as 0/1 and
numeric columns, so that the comparison with it isolates what reading text
and encoding it cost beside reading and fitting the same design given as
numbers. Each path runs ``read_table`` -> ``assign_roles`` ->
``encode_frame`` -> ``LaplaceLogisticClassifier(prior_scale=1.0).fit``; the
paths are timed in turns (``_common.time_interleaved``), medians quoted. The
notes give the stage medians (read, roles, encode, fit), timed separately.

Target (issue 18): mixed / numeric <= 1.3 in the same run: the encoding must
not dominate. The second row (mixed / pre-encoded) has no target; it says
how much of the first ratio is the wider design rather than the encoding.

Usage: ``python benchmarks/bench_encoding.py [--quick]`` (``--quick``: n = 2e4
only, 3 rounds); ``run(quick)`` returns rows in the suite's format.
"""

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import make_row, print_table, time_interleaved  # noqa: E402

TARGET = 1.3
LEVELS = (4, 8, 15)
N_NUMERIC = 8


def make_files(n, folder, seed=0):
    """Write the mixed, the numeric-only and the pre-encoded CSV; return their paths."""
    rng = np.random.default_rng(seed)
    X = rng.standard_normal((n, N_NUMERIC))
    eta = X @ rng.normal(0.0, 0.5, N_NUMERIC) - 0.3
    frame = pd.DataFrame(X, columns=[f"x{j}" for j in range(N_NUMERIC)])
    for j, k in enumerate(LEVELS):
        codes = rng.integers(0, k, n)
        eta = eta + rng.normal(0.0, 0.5, k)[codes]
        frame[f"c{j}"] = np.array([f"level{i}" for i in range(k)])[codes]
    frame["label"] = np.where(rng.random(n) < 1.0 / (1.0 + np.exp(-eta)), "yes", "no")
    paths = [Path(folder) / f"{kind}_{n}.csv" for kind in ("mixed", "numeric", "encoded")]
    cats = [f"c{j}" for j in range(len(LEVELS))]
    frame.to_csv(paths[0], index=False)
    frame.drop(columns=cats).to_csv(paths[1], index=False)
    pd.get_dummies(frame, columns=cats, prefix_sep="=", dtype=int).to_csv(paths[2], index=False)
    return paths


def pipeline(path, stages=None):
    """Read, assign roles, encode and fit; optionally record stage times."""
    from skbayeslogit import LaplaceLogisticClassifier
    from skbayeslogit._frame.encoding import encode_frame
    from skbayeslogit._frame.reading import read_table
    from skbayeslogit._frame.roles import assign_roles

    t = [time.perf_counter()]
    read = read_table(path)
    t.append(time.perf_counter())
    roles = assign_roles(read.frame, "label", index_columns=read.index_columns)
    t.append(time.perf_counter())
    design = encode_frame(read.frame, roles, prior_scale=1.0)
    t.append(time.perf_counter())
    model = LaplaceLogisticClassifier(prior_scale=1.0).fit(design.X, design.y)
    t.append(time.perf_counter())
    if stages is not None:
        for name, a, b in zip(("read", "roles", "encode", "fit"), t, t[1:], strict=False):
            stages.setdefault(name, []).append(b - a)
    return model


def _stages(path, repeats):
    stages = {}
    for _ in range(repeats):
        pipeline(path, stages)
    return ", ".join(f"{k} {statistics.median(v):.3f}" for k, v in stages.items())


def bench_one(n, folder, repeats):
    """Two rows at n rows: mixed against numeric-only and against pre-encoded."""
    mixed, numeric, encoded = make_files(n, folder)
    timed = time_interleaved(
        {
            "mixed": lambda: pipeline(mixed),
            "numeric": lambda: pipeline(numeric),
            "encoded": lambda: pipeline(encoded),
        },
        repeats=repeats,
    )
    t_mixed, t_num, t_enc = (timed[k][0] for k in ("mixed", "numeric", "encoded"))
    width = pipeline(mixed).coef_.shape[1]
    size = f"n={n:.0e}".replace("e+0", "e")
    mixed_stages = _stages(mixed, repeats)
    return [
        make_row(
            f"csv -> fit {size} 8 num + 3 cat",
            t_mixed,
            "same path, 8 numeric only",
            t_num,
            notes=f"stages (s): mixed {mixed_stages}; numeric {_stages(numeric, repeats)}; "
            f"{width} design columns; {repeats} rounds",
        ),
        make_row(
            f"csv -> fit {size} 8 num + 3 cat",
            t_mixed,
            f"same {width} columns pre-encoded",
            t_enc,
            notes=f"stages (s): pre-encoded {_stages(encoded, repeats)}",
        ),
    ]


def run(quick=False):
    """Rows for n = 2e4 (and 2e5 unless ``quick``)."""
    repeats = 3 if quick else 7
    sizes = (20_000,) if quick else (20_000, 200_000)
    with tempfile.TemporaryDirectory() as folder:
        return [row for n in sizes for row in bench_one(n, folder, repeats)]


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n = 2e4 only, 3 rounds")
    args = parser.parse_args(argv)
    rows = run(quick=args.quick)
    print_table(rows)
    for r in rows:
        if r["reference"].endswith("numeric only"):
            verdict = "MET" if r["ratio"] <= TARGET else "MISSED"
            print(
                f"{r['workload']}: mixed / numeric {r['ratio']:.2f} (target <= {TARGET}) {verdict}"
            )


if __name__ == "__main__":
    main()
