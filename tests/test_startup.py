"""Start-up costs that must not creep back: compiles in the demo, imports.

The budgets come from the project's own measurements (benchmarks/README.md,
"Start-up"); the compile time is numba's own account of it (its
``numba:compile`` events), not wall time, so load on the machine moves it
less than it moves the report's run time.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from skbayeslogit._kernels import tempered_dispatch as tk
from skbayeslogit._kernels import tempered_loss
from skbayeslogit._kernels import tempered_numpy as tn
from skbayeslogit._kernels.config import NUMPY_MAX_ELEMENTS

# Seconds of numba compiling a cold demo report may take.  Measured: 1.2 s
# (the moment kernel only) with the machine's load average at 4 on 2 cores,
# against 20-30 s before the numpy paths; one tempered kernel family alone
# takes several seconds, so the budget catches one coming back.
COMPILE_BUDGET_S = 4.0

_REPORT = """
import json, sys, time
from numba.core import event

class Compiles(event.Listener):
    def __init__(self):
        self.open, self.top = [], []
    def on_start(self, ev):
        self.open.append(time.perf_counter())
    def on_end(self, ev):
        took = time.perf_counter() - self.open.pop()
        if not self.open:  # nested compiles are inside their caller's time
            d = ev.data.get("dispatcher")
            self.top.append((took, getattr(getattr(d, "py_func", d), "__qualname__", "?")))

listener = Compiles()
event.register("numba:compile", listener)
from skbayeslogit.cli import run
sys.argv = ["skbayeslogit", "report", "--out", sys.argv[1], "--quiet"]
try:
    run()
except SystemExit as exc:
    assert not exc.code, exc.code
print(json.dumps(listener.top))
"""


def _run(code, env_extra, *args, timeout=600):
    env = dict(os.environ, **env_extra)
    return subprocess.run(
        [sys.executable, "-c", textwrap.dedent(code), *args],
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
    )


def test_cold_demo_report_compiles_within_budget(tmp_path):
    cache = tmp_path / "numba_cache"
    cache.mkdir()
    res = _run(_REPORT, {"NUMBA_CACHE_DIR": str(cache)}, str(tmp_path / "out"))
    assert res.returncode == 0, res.stderr[-2000:]
    compiles = json.loads(res.stdout.strip().splitlines()[-1])
    total = sum(took for took, _ in compiles)
    assert total <= COMPILE_BUDGET_S, sorted(compiles, reverse=True)


def test_import_loads_no_numba_and_registers_the_accessor():
    code = """
        import sys
        import skbayeslogit, pandas as pd
        assert type(pd.DataFrame({"a": [1.0]}).bayeslogit).__name__
        print(",".join(m for m in ("numba", "llvmlite", "matplotlib") if m in sys.modules))
    """
    res = _run(code, {})
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.strip() == ""


# ------------------------------------------- the numpy path against the kernels


def _loss_args(n, k, use_index, seed):
    rng = np.random.default_rng(seed)
    a = rng.normal(scale=3.0, size=(n, k)) * np.geomspace(1e-2, 1e2, n)[:, None]
    idx = rng.integers(0, k, size=n)
    yprob = np.empty((1, k)) if use_index else rng.dirichlet(np.ones(k), size=n)
    return a, idx, yprob


@pytest.mark.parametrize("t", [0.0, 0.5, 0.8, 1.0, 1.01, 1.2, 1.3, 2.0, 3.7])
@pytest.mark.parametrize("k", [2, 3, 7, 40])
def test_numpy_normaliser_is_the_general_kernel_bitwise(t, k):
    # Reference: the general family's compiled kernel on the same rows (its
    # accuracy is checked against scipy's brentq in test_tempered_kernels).
    a = _loss_args(53, k, True, seed=k)[0]
    lam, p = np.empty(53), np.empty_like(a)
    tk._NORMALISE_KERNELS["general"][0](a, t, p, lam, True, 0, 53, 1)
    lam_np, p_np = np.empty(53), np.empty_like(a)
    tn.normalise(a, t, p_np, lam_np, True)
    np.testing.assert_array_equal(lam_np, lam)
    np.testing.assert_array_equal(p_np, p)


@pytest.mark.parametrize("t2", [0.5, 0.8, 1.0, 1.2, 1.3, 2.0])
@pytest.mark.parametrize("t1", [0.0, 0.8, 1.0])
@pytest.mark.parametrize("use_index", [True, False])
def test_numpy_loss_is_the_general_kernel_bitwise(t1, t2, use_index):
    for k, ls, warm in ((3, 0.0, False), (7, 0.1, True)):
        a, idx, yprob = _loss_args(41, k, use_index, seed=k)
        out = []
        for path in ("kernel", "numpy"):
            lam = a.max(axis=1) + 0.3  # a start for the warm case
            loss, grad = np.empty(41), np.empty_like(a)
            args = (a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad)
            if path == "kernel":
                tk._LOSS_KERNELS["general"][0](*args, 0, 41, 1)
            else:
                tn.multiclass_loss(*args)
            out.append((lam, loss, grad))
        for got, want in zip(out[1], out[0], strict=True):
            np.testing.assert_array_equal(got, want)


@pytest.mark.parametrize("t2", [0.5, 0.8, 1.0, 1.2, 2.0, 3.7])
@pytest.mark.parametrize("t1", [0.0, 0.8, 1.0])
def test_numpy_binary_loss_is_the_binary_kernel_bitwise(t1, t2):
    rng = np.random.default_rng(7)
    a = rng.normal(scale=5.0, size=60)
    a[:3] = (0.0, 1e8, -1e8)
    y = rng.integers(0, 2, size=60).astype(np.float64)
    y[-5:] = rng.uniform(size=5)
    loss, grad = np.empty(60), np.empty(60)
    tempered_loss.binary_serial(a, y, t1, t2, 0.1, loss, grad)
    loss_np, grad_np = np.empty(60), np.empty(60)
    tn.binary_loss(a, y, t1, t2, 0.1, loss_np, grad_np)
    np.testing.assert_array_equal(loss_np, loss)
    np.testing.assert_array_equal(grad_np, grad)


def test_blocked_kernels_agree_with_the_numpy_path_of_a_small_call():
    # Integer-power t2 from BLOCKED_MIN_ELEMENTS runs the blocked family; the same
    # rows in small calls run the numpy path.  Normalisers bitwise (the block
    # solver is the row solver lane by lane), the loss to rounding.
    k = 4
    n = tk.BLOCKED_MIN_ELEMENTS // k
    a, idx, _ = _loss_args(n, k, True, seed=3)
    from skbayeslogit.tempered_functions import bitempered_loss, tempered_normaliser

    assert tk._kernel_family(k, 1.2, a.size) == "blocked"
    lam = tempered_normaliser(a, 1.2)
    loss, grad = bitempered_loss(a, idx, 0.8, 1.2)
    rows = slice(0, NUMPY_MAX_ELEMENTS // (2 * k))
    np.testing.assert_array_equal(tempered_normaliser(a[rows], 1.2), lam[rows])
    small_loss, small_grad = bitempered_loss(a[rows], idx[rows], 0.8, 1.2)
    # Rounding of a sum of K terms of size ~ the loss, and of the gradient's
    # K terms: a few eps relative.
    np.testing.assert_allclose(small_loss, loss[rows], rtol=1e-13, atol=1e-15)
    np.testing.assert_allclose(small_grad, grad[rows], rtol=1e-12, atol=1e-15)
