"""Run every benchmark script and print one table.

``python benchmarks/run.py`` runs the full suite, ``--quick`` the short one;
``--only NAME`` (repeatable, or comma separated: ``laplace``, ``models``,
``scaling``, ...; the part of ``bench_NAME.py`` after ``bench_``) selects
scripts. Each script's ``run(quick)`` is called in its own child interpreter
(a crash, a hang past ``--timeout`` or an exception there becomes an ERROR
row and the other scripts still run; a fresh process also keeps one
script's memory and compiled kernels from colouring the next one's figures).

Output: one aligned table (workload, ours, reference, reference time,
ratio = ours / reference of the medians, peak memory, target, met?, notes),
written as ``benchmarks/results/suite_{quick,full}.csv`` together with
``suite_{quick,full}_scaling.png`` (time against n and against d, log-log,
with the fitted slopes) when the scaling script ran.

The BLAS kernel and the OPENBLAS_CORETYPE / OPENBLAS_L2_SIZE variables in
force are printed and stored with every row: on this machine those variables
select a slower kernel, so say which setting a figure was taken with (they
may be unset for one benchmarking command, ``env -u OPENBLAS_CORETYPE -u
OPENBLAS_L2_SIZE python benchmarks/run.py``, never in tests or CI).
"""

import argparse
import csv
import datetime as _dt
import json
import math
import re
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from _common import RESULTS_DIR, blas_description  # noqa: E402

COLUMNS = [
    "script",
    "workload",
    "ours_s",
    "reference",
    "reference_s",
    "ratio",
    "peak_mem_mb",
    "target",
    "figure",
    "met",
    "notes",
]

_CHILD = r"""
import importlib, json, math, sys, traceback
sys.path.insert(0, {here!r})
def _clean(v):
    if isinstance(v, dict):
        return {{k: _clean(x) for k, x in v.items()}}
    if isinstance(v, (list, tuple)):
        return [_clean(x) for x in v]
    if hasattr(v, 'item') and not isinstance(v, (str, bytes)):
        try:
            v = v.item()
        except (ValueError, TypeError):
            v = v.tolist()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v
try:
    rows = importlib.import_module({module!r}).run(quick={quick!r})
    payload = {{'rows': _clean(list(rows))}}
except BaseException as exc:  # noqa: BLE001 - reported as an ERROR row
    payload = {{'error': f'{{type(exc).__name__}}: {{exc}}',
               'traceback': traceback.format_exc()[-2000:]}}
sys.stdout.write('\nRUN_JSON=' + json.dumps(payload) + '\n')
"""


def _n_of(workload):
    m = re.search(r"n=(\d+(?:\.\d+)?e\d+|\d+)", workload)
    return float(m.group(1)) if m else None


# Targets for rows of scripts that do not set their own (issues 2, 3, 4, 7).
def _external_target(script, row):
    w = row["workload"]
    n = _n_of(w)
    if script == "laplace":
        if w.startswith("laplace fit") and "default" not in w and n and n >= 1e5:
            return "ratio <= 0.7 (n >= 1e5)", row["ratio"], 0.7
        if w.startswith("laplace predict") and "n=1e6 d=20" in w:
            return "ratio <= 3 (n=1e6 d=20)", row["ratio"], 3.0
    if script == "probit" and w.startswith("probit") and n and n >= 1e5:
        return "ratio <= 0.3 (n >= 1e5)", row["ratio"], 0.3
    if script == "tempered_kernels" and w.startswith("normaliser"):
        return "ratio <= 0.1 (>= 10x numpy)", row["ratio"], 0.1
    return None, None, None


def normalise(script, row):
    """Bring a script's row to the suite's columns."""
    row = dict(row)
    row["script"] = script
    if script == "tempered_kernels" and "reference" not in row:
        # That script reports ratio = numpy / numba (a speed-up); the suite
        # quotes every ratio as ours / reference.
        ours, ref = row.get("ours_s"), row.get("reference_s")
        row["reference"] = "numpy, same algorithm"
        row["ratio"] = ours / ref if ours and ref else None
        row.setdefault(
            "notes",
            f"rows/s ours {row.get('rows_per_s_ours', 0):.3g}, numpy "
            f"{row.get('rows_per_s_reference', 0):.3g}; max |diff| "
            f"{row.get('max_abs_diff', float('nan')):.1e}",
        )
    if "target" not in row:
        target, figure, limit = _external_target(script, row)
        row["target"] = target
        row["figure"] = figure
        ok = figure is not None and math.isfinite(figure)
        row["met"] = (figure <= limit) if (target and ok) else (False if target else None)
    for key in COLUMNS:
        row.setdefault(key, None)
    return row


def discover():
    return sorted(p.stem[len("bench_") :] for p in HERE.glob("bench_*.py"))


def run_script(name, quick, timeout):
    code = _CHILD.format(here=str(HERE), module=f"bench_{name}", quick=quick)
    t0 = time.perf_counter()
    try:
        proc = subprocess.run(
            [sys.executable, "-c", code],
            capture_output=True,
            text=True,
            timeout=timeout,
            cwd=str(HERE.parent),
        )
    except subprocess.TimeoutExpired:
        return [_error_row(name, f"timed out after {timeout:.0f}s")], time.perf_counter() - t0
    elapsed = time.perf_counter() - t0
    if "RUN_JSON=" not in proc.stdout:
        tail = " | ".join((proc.stderr or "").strip().splitlines()[-3:])
        return [_error_row(name, f"child exited {proc.returncode}: {tail}")], elapsed
    payload = json.loads(proc.stdout.rsplit("RUN_JSON=", 1)[1].splitlines()[0])
    if "error" in payload:
        last = payload["traceback"].strip().splitlines()
        where = next((ln.strip() for ln in reversed(last) if ln.strip().startswith("File")), "")
        return [_error_row(name, f"{payload['error']} ({where})")], elapsed
    return [normalise(name, r) for r in payload["rows"]], elapsed


def _error_row(name, message):
    row = {key: None for key in COLUMNS}
    row.update(script=name, workload=f"{name}: ERROR", notes=message, met=False)
    return row


def _fmt(value, spec):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-"
    return format(value, spec)


def _met_text(row):
    if row["met"] is None:
        return "-"
    fig = row.get("figure")
    tail = "" if fig is None else f" {fig:.3g}"
    return ("MET" if row["met"] else "MISSED") + tail


def format_table(rows):
    cols = [
        ("workload", lambda r: r["workload"], "<"),
        ("ours_s", lambda r: _fmt(r["ours_s"], ".4f"), ">"),
        ("reference", lambda r: r["reference"] or "-", "<"),
        ("ref_s", lambda r: _fmt(r["reference_s"], ".4f"), ">"),
        ("ratio", lambda r: _fmt(r["ratio"], ".3g"), ">"),
        ("peak_MiB", lambda r: _fmt(r["peak_mem_mb"], ".1f"), ">"),
        ("target", lambda r: r["target"] or "-", "<"),
        ("met?", _met_text, "<"),
        ("notes", lambda r: r["notes"] or "", "<"),
    ]
    cells = [[fn(r) for _, fn, _ in cols] for r in rows]
    widths = [max([len(h)] + [len(c[i]) for c in cells]) for i, (h, _, _) in enumerate(cols)]
    widths[-1] = 0
    line = lambda vals: "  ".join(  # noqa: E731
        f"{v:{a}{w}}" if w else v for v, w, (_, _, a) in zip(vals, widths, cols, strict=True)
    )
    out = [line([h for h, _, _ in cols])]
    out.append("-" * (sum(widths[:-1]) + 2 * (len(cols) - 1) + 5))
    out.extend(line(c) for c in cells)
    return "\n".join(out)


def write_csv(rows, path, info):
    with open(path, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=COLUMNS + ["run_started", "blas"])
        writer.writeheader()
        for r in rows:
            out = {k: r.get(k) for k in COLUMNS}
            out.update(info)
            writer.writerow(out)


def plot_scaling(rows, path):
    curves = [c for r in rows for c in (r.get("curve") or [])]
    if not curves:
        return None
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    axes_keys = [k for k in ("n", "d") if any(c["axis"] == k for c in curves)]
    fig, axes = plt.subplots(1, len(axes_keys), figsize=(6 * len(axes_keys), 4.5), squeeze=False)
    for ax, key in zip(axes[0], axes_keys, strict=True):
        for c in curves:
            if c["axis"] != key:
                continue
            x, y = np.asarray(c["x"], float), np.asarray(c["y"], float)
            slope, icpt = np.polyfit(np.log10(x), np.log10(y), 1)
            (line,) = ax.loglog(x, y, "o-", label=f"{c['series']} (slope {slope:.2f})")
            ax.loglog(x, 10**icpt * x**slope, ":", color=line.get_color(), alpha=0.6)
        ax.set_xlabel("rows n (d = 20)" if key == "n" else "features d")
        ax.set_ylabel("fit time, s (median)")
        ax.set_title(f"Laplace fit cost against {key}")
        if key == "n":
            ref = np.array([x.min(), x.max()])
            ax.loglog(ref, y[0] * ref / ref[0], color="grey", lw=0.8, label="slope 1 guide")
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)
    return path


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="the short suite (< 2 min goal)")
    parser.add_argument(
        "--only", action="append", default=[], metavar="NAME", help="scripts to run"
    )
    parser.add_argument("--timeout", type=float, default=None, help="seconds per script")
    args = parser.parse_args(argv)
    names = discover()
    if args.only:
        wanted = [w.strip().removeprefix("bench_") for o in args.only for w in o.split(",")]
        unknown = [w for w in wanted if w not in names]
        if unknown:
            parser.error(f"unknown script(s) {unknown}; have {names}")
        names = [n for n in names if n in wanted]
    timeout = args.timeout or (600.0 if args.quick else 3600.0)
    mode = "quick" if args.quick else "full"
    started = _dt.datetime.now().isoformat(timespec="seconds")
    blas = blas_description()
    print(f"skbayeslogit benchmark suite ({mode}), started {started}")
    print(f"BLAS: {blas}\n")
    rows, spent = [], {}
    t_all = time.perf_counter()
    for name in names:
        print(f"running bench_{name} ...", flush=True)
        got, spent[name] = run_script(name, args.quick, timeout)
        rows.extend(got)
    total = time.perf_counter() - t_all
    print()
    print(format_table(rows))
    print("\nseconds per script: " + ", ".join(f"{k} {v:.0f}" for k, v in spent.items()))
    print(f"total {total:.0f}s")
    judged = [r for r in rows if r["met"] is not None]
    print(
        f"targets: {sum(bool(r['met']) for r in judged)} met, "
        f"{sum(not r['met'] for r in judged)} missed or failed"
    )
    RESULTS_DIR.mkdir(parents=True, exist_ok=True)
    suffix = "" if not args.only else "_" + "_".join(names)
    csv_path = RESULTS_DIR / f"suite_{mode}{suffix}.csv"
    write_csv(rows, csv_path, {"run_started": started, "blas": blas})
    print(f"written {csv_path}")
    png = plot_scaling(rows, RESULTS_DIR / f"suite_{mode}{suffix}_scaling.png")
    if png:
        print(f"written {png}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
