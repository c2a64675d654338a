"""Helpers for the suite's own workloads, next to those in ``_common``.

- ``suite_row``: a ``_common.make_row`` row plus the three keys the suite
  table adds: ``target`` (the criterion, as text), ``figure`` (the number
  judged against it) and ``met`` (True / False, None when a row has no
  target).
- ``run_snippet``: run Python code in a fresh interpreter and read back one
  JSON object it prints (subprocess measurements: start-up, peak memory,
  the MCMC reference in its own environment).
- ``RSS_SNIPPET``: code a snippet can include to read its current and peak
  resident set size.
- ``loglog_slope``: least-squares slope of log(time) on log(size).
- ``label``: ``n=1e5 d=20`` style workload labels.
"""

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _common import make_row  # noqa: E402

REPO = Path(__file__).resolve().parent.parent

#: Paste into a snippet: ``rss_mb()`` is the current resident set (from
#: /proc/self/statm), ``maxrss_mb()`` the peak so far (getrusage ru_maxrss,
#: which Linux reports in KiB).
RSS_SNIPPET = """
import os as _os, resource as _resource
def rss_mb():
    with open('/proc/self/statm') as fh:
        return int(fh.read().split()[1]) * _os.sysconf('SC_PAGE_SIZE') / 2**20
def maxrss_mb():
    return _resource.getrusage(_resource.RUSAGE_SELF).ru_maxrss / 1024.0
"""

_MARK = "SUITE_JSON="


def suite_row(
    workload,
    ours_s,
    reference,
    reference_s,
    *,
    peak_mem_mb=None,
    target=None,
    figure=None,
    met=None,
    notes="",
):
    """One result row with the target keys; ``figure`` defaults to the ratio.

    ``met`` may be given as a callable of the figure (for example
    ``lambda f: f <= 3``); a non-finite figure then counts as not met.
    """
    row = make_row(
        workload,
        float("nan") if ours_s is None else ours_s,
        reference,
        float("nan") if reference_s is None else reference_s,
        peak_mem_mb=peak_mem_mb,
        notes=notes,
    )
    if figure is None and target is not None:
        figure = row["ratio"]
    if callable(met):
        met = bool(figure is not None and math.isfinite(figure) and met(figure))
    row.update({"target": target, "figure": figure, "met": met})
    return row


def snippet_json(obj_expr):
    """The line a snippet ends with to hand ``obj_expr`` back to the parent."""
    return (
        "\nimport json as _json, sys as _sys\n"
        f"_sys.stdout.write('\\n{_MARK}' + _json.dumps({obj_expr}) + '\\n')\n"
    )


def run_snippet(code, *, env=None, python=None, timeout=None, cwd=None):
    """Run ``code`` with ``python -c`` and return the JSON object it printed.

    The snippet must print one line ``SUITE_JSON=<json>`` (see
    ``snippet_json``). Raises ``RuntimeError`` with the tail of stderr when
    the child fails or prints no such line.
    """
    proc = subprocess.run(
        [python or sys.executable, "-c", code],
        capture_output=True,
        text=True,
        env=env,
        timeout=timeout,
        cwd=cwd or str(REPO),
    )
    if proc.returncode != 0 or _MARK not in proc.stdout:
        tail = (proc.stderr or proc.stdout).strip().splitlines()[-5:]
        raise RuntimeError(f"snippet failed (exit {proc.returncode}): " + " | ".join(tail))
    return json.loads(proc.stdout.rsplit(_MARK, 1)[1].splitlines()[0])


def child_env(**extra):
    """The current environment plus ``extra`` (values of None remove a key)."""
    env = dict(os.environ)
    for key, value in extra.items():
        if value is None:
            env.pop(key, None)
        else:
            env[key] = str(value)
    return env


def loglog_slope(sizes, times):
    """Least-squares slope and intercept of log10(time) against log10(size)."""
    x = np.log10(np.asarray(sizes, dtype=float))
    y = np.log10(np.asarray(times, dtype=float))
    slope, intercept = np.polyfit(x, y, 1)
    return float(slope), float(intercept)


def label(n=None, d=None, K=None):
    """``n=1e5 d=20 K=10`` (parts that are None are left out)."""
    parts = []
    if n is not None:
        mant, exp = f"{n:.0e}".split("e")
        parts.append(f"n={mant}e{int(exp)}")
    if d is not None:
        parts.append(f"d={d}")
    if K is not None:
        parts.append(f"K={K}")
    return " ".join(parts)
