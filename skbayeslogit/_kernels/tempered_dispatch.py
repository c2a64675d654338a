"""Which tempered kernel runs, and its serial or parallel launch.

Two kernel families: "general" solves one row at a time for any temperature
(:mod:`.tempered_rows`, :mod:`.tempered_loss`); "blocked" solves rows in
blocks for the integer-power temperatures (:mod:`.tempered_blocks`,
:mod:`.tempered_loss_blocks`).  Python picks the family, so a fit compiles
only the one it runs (each is a long LLVM compile, see benchmarks/README.md).
Every launch goes through :func:`skbayeslogit._kernels.config.launch`
(serial below a size, inside ``serial_kernels()`` and when another thread
holds the parallel lock).

The functions here take arrays as the kernels want them and never validate:
C-contiguous writeable float64 activations (and int64 class indices), so
that each kernel compiles one signature; :mod:`skbayeslogit.tempered_functions`
checks and converts user input, the fit converts its labels once.
"""

from __future__ import annotations

import importlib
import threading

import numpy as np

from . import tempered_numpy
from .config import in_serial_kernels, launch_or_numpy
from .tempered_params import integer_power

__all__ = [
    "normalise",
    "probabilities",
    "multiclass_loss",
    "binary_indexed",
    "binary_loss",
    "load_cached_loss",
]


#: Work items (rows x classes) from which a call outside a fit's passes runs
#: the blocked family; below, the general family (whose compile is several
#: times cheaper; its normalisers are bitwise the blocked ones), or its numpy
#: path below config.NUMPY_MAX_ELEMENTS.
BLOCKED_MIN_ELEMENTS = 1 << 14


def _kernel_family(k, t, work=BLOCKED_MIN_ELEMENTS):
    """'blocked' or 'general': the kernel family for K classes at temperature t.

    The block solver covers the integer-power temperatures with K >= 2; the
    others need log1p/exp per element, which do not vectorise here.  Calls
    of fewer than :data:`BLOCKED_MIN_ELEMENTS` work items take the general
    family.
    """
    blocked = work >= BLOCKED_MIN_ELEMENTS and k >= 2 and t != 1.0 and integer_power(t) != 0
    return "blocked" if blocked else "general"


def _call_work(work):
    # A fit's passes keep the blocked family whatever their span: they run
    # the numpy path until the kernel is compiled (config.launch_or_numpy).
    return BLOCKED_MIN_ELEMENTS if in_serial_kernels() else work


def _n_chunks(n):
    # Enough chunks to balance the threads, each at least one block long.
    import numba

    from .tempered_blocks import BLOCK

    return max(1, min(n // BLOCK, 8 * numba.get_num_threads()))


class _KernelTable(dict):
    """Family -> (serial, parallel) kernels, imported on first look-up.

    The kernel modules import numba, which the numpy path does not need.
    Looked up at each call (tests swap entries to watch the launches).
    """

    def __init__(self, modules):
        super().__init__()
        self._modules = modules

    def __missing__(self, family):
        module, serial, parallel = self._modules[family]
        loaded = importlib.import_module(module, __package__)
        kernels = (getattr(loaded, serial), getattr(loaded, parallel))
        self[family] = kernels
        return kernels


_NORMALISE_KERNELS = _KernelTable(
    {
        "general": (".tempered_rows", "normalise_general_serial", "normalise_general_parallel"),
        "blocked": (".tempered_blocks", "normalise_blocked_serial", "normalise_blocked_parallel"),
    }
)
_LOSS_KERNELS = _KernelTable(
    {
        "general": (".tempered_loss", "loss_general_serial", "loss_general_parallel"),
        "blocked": (".tempered_loss_blocks", "loss_blocked_serial", "loss_blocked_parallel"),
        "binary": (".tempered_loss", "binary_serial", "binary_parallel"),
    }
)


def normalise(a, t, p, lam, want_p):
    """Absolute normalisers of the rows of `a` (n, K) into `lam`; probabilities into `p`.

    `p` is written only when `want_p` (otherwise any float64 (1, 1) array).
    """
    n = a.shape[0]
    family = _kernel_family(a.shape[1], t, _call_work(a.size))
    launch_or_numpy(
        lambda: _NORMALISE_KERNELS[family],
        a.size,
        lambda: (a, t, p, lam, want_p, 0, n, _n_chunks(n)),
        lambda: tempered_numpy.normalise(a, t, p, lam, want_p),
    )


def probabilities(a, t):
    """Tempered softmax of the rows of `a` (n, K): C-contiguous float64, finite."""
    p = np.empty_like(a)
    normalise(a, t, p, np.empty(a.shape[0]), True)
    return p


def multiclass_loss(a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad):
    """Bi-tempered loss (n,) and gradient (n, K) of activations `a` (n, K).

    Labels are class indices `idx` (n,) when `use_index` (then `yprob` is any
    float64 (1, K) array), else probability rows `yprob` (n, K) (then `idx`
    is any int64 (1,) array).  `lam` (n,) holds absolute normalisers, read
    as Newton's starting points when `warm` and overwritten.
    """
    n = a.shape[0]
    family = _kernel_family(a.shape[1], t2, _call_work(a.size))
    labels = (a, idx, yprob, use_index, t1, t2, ls, warm, lam, loss, grad)
    launch_or_numpy(
        lambda: _LOSS_KERNELS[family], a.size, lambda: (*labels, 0, n, _n_chunks(n)),
        lambda: tempered_numpy.multiclass_loss(*labels),
    )  # fmt: skip


def binary_indexed(t2):
    """Whether :func:`binary_loss` at `t2` takes int64 class indices (0/1 labels)."""
    return _kernel_family(2, t2) == "blocked"


def binary_loss(a, y, t1, t2, ls, loss, grad):
    """Bi-tempered loss (n,) and d loss / d a (n,) of the binary model, rows (0, a).

    Labels `y` (n,): float64, the probability of class 1; or, where
    :func:`binary_indexed` (integer-power `t2`), int64 class indices too.
    Integer-power `t2` runs the blocked loss kernel on the (n, 1) view of `a`
    (no pairs are packed); others the scalar binary rows.
    """
    n = a.shape[0]

    def numpy_path():
        tempered_numpy.binary_loss(a, y, t1, t2, ls, loss, grad)

    if not binary_indexed(t2):
        args = (a, y, t1, t2, ls, loss, grad)
        launch_or_numpy(lambda: _LOSS_KERNELS["binary"], 2 * n, lambda: args, numpy_path)
        return
    use_index = y.dtype == np.int64
    if use_index:
        idx, yprob = y, np.empty((1, 1))
    else:
        idx, yprob = np.zeros(1, dtype=np.int64), y.reshape(n, 1)

    def args():
        return (
            a.reshape(n, 1), idx, yprob, use_index, t1, t2, ls, False, np.empty(n), loss,
            grad.reshape(n, 1), 0, n, _n_chunks(n),
        )  # fmt: skip

    launch_or_numpy(lambda: _LOSS_KERNELS["blocked"], 2 * n, args, numpy_path)


#: Work items of a fit's pass from which :func:`load_cached_loss` pays within
#: one fit: the numpy path costs about 1 us more a binary row than the
#: kernel, over about six passes; loading the cached blocked kernel about
#: 0.4 s of one core (benchmarks/README.md).
LOAD_MIN_ELEMENTS = 1 << 17


def _on_disk(dispatcher):
    """Whether numba's disk cache holds code of `dispatcher` for its current source."""
    try:
        # numba's index of the function's cache file: empty when missing,
        # stale (another source stamp) or written by another numba.
        return bool(dispatcher._cache._cache_file._load_index())
    except Exception:  # noqa: BLE001 - no cache, or numba's internals moved
        return False


def load_cached_loss(q, t1, t2, ls, work):
    """Start loading the serial loss kernel of a fit from numba's disk cache.

    A fit's passes run the numpy path until the serial kernel is compiled
    (:func:`.config.launch_or_numpy`), and start its compile only after many
    work items, so that a process that fits little never waits for or
    shares its cores with a long compile. When the disk cache already holds
    the kernel, loading it costs a fraction of one large fit's numpy passes:
    this loads it in a background thread at the start of such a fit (`work`
    items a pass, from :data:`LOAD_MIN_ELEMENTS`), by one call of the kernel
    of the family and argument types that the fit's passes use. Without a
    cached copy it does nothing: the compile waits for the usual rule.

    Parameters
    ----------
    q : int
        1 for the binary model, else K.
    t1, t2, ls : float
        The loss's temperatures and label smoothing.
    work : int
        Work items (rows x classes) of one of the fit's passes.
    """
    if work < LOAD_MIN_ELEMENTS:
        return
    k = 2 if q == 1 else q
    if q == 1:
        family = "blocked" if binary_indexed(t2) else "binary"
    else:
        family = _kernel_family(k, t2)
    serial = _LOSS_KERNELS[family][0]
    if getattr(serial, "signatures", True) or not _on_disk(serial):
        return
    threading.Thread(target=_serial_call, args=(q, t1, t2, ls), daemon=True).start()


def _serial_call(q, t1, t2, ls):
    # Outside serial_kernels(), a call of BLOCKED_MIN_ELEMENTS items takes
    # the family a fit's passes take and, being below
    # config.PARALLEL_MIN_ELEMENTS, the serial build: that build is
    # compiled (here: loaded) with the passes' argument types.
    if q == 1:
        n = BLOCKED_MIN_ELEMENTS // 2
        y = np.zeros(n, dtype=np.int64 if binary_indexed(t2) else np.float64)
        binary_loss(np.zeros(n), y, t1, t2, ls, np.empty(n), np.empty(n))
        return
    n = -(-BLOCKED_MIN_ELEMENTS // q)
    multiclass_loss(
        np.zeros((n, q)), np.zeros(n, dtype=np.int64), np.empty((1, q)), True, t1, t2, ls,
        False, np.empty(n), np.empty(n), np.empty((n, q)),
    )  # fmt: skip
