"""How the package compiles and launches its numba kernels.

Three decisions live here so that every kernel module makes them the same way.

Caching
    Kernels are compiled lazily (no signatures are given, so nothing is
    compiled at import) and cached on disk with ``cache=True`` so that a second
    process loads machine code instead of recompiling.  numba raises
    ``RuntimeError`` at *decoration* time, i.e. during ``import``, when it finds
    no writable cache directory (read-only site-packages, a read-only
    ``NUMBA_CACHE_DIR``, a sandbox).  :func:`jit` catches exactly that and
    builds the same kernel without a cache, so importing the package never
    fails because of the cache; the price is a recompile in every process.

Threading
    numba's threading layer is a process-wide choice that belongs to the
    application, so this module does not set ``numba.config.THREADING_LAYER``.
    Instead every parallel launch of ours goes through :func:`launch`, which
    makes our kernels safe under whichever layer is in use:

    * the ``workqueue`` layer aborts the whole process when two Python threads
      enter parallel regions at the same time (joblib's threading backend does
      exactly that).  :func:`launch` takes a process-wide lock *without
      blocking*; a thread that finds it taken runs the serial build of the same
      kernel instead of waiting, so concurrent calls neither abort nor
      serialise behind each other;
    * GNU OpenMP (numba's ``omp`` layer on Linux) hangs in a child process
      forked after its thread pool was started.  A fork hook records whether
      that happened, and such a child runs serial kernels only;
    * small inputs never pay for a parallel launch: below
      :data:`PARALLEL_MIN_ELEMENTS` work items the serial build is used;
    * a pass that already runs row spans on worker threads (the tempered
      fit's gradient pass) wraps each span in :func:`serial_kernels`, so
      numba's threads do not compete with the workers for the same cores.

    Serial and parallel builds run the same per-row code and there is no
    reduction across rows, so both give bitwise identical results.

Flags
    ``fastmath`` is never used: the kernels rely on IEEE comparisons with
    infinities and on ``x > 0`` support tests that fast-math may fold away.

Compile cost
    A kernel that runs only on a few rows costs more to compile than it
    saves, so the tempered kernels have a numpy path of the same algorithm
    (:func:`launch_or_numpy`, :func:`numpy_first`): calls below
    :data:`NUMPY_MAX_ELEMENTS` work items take it, whatever the process
    compiled before, and a fit's larger passes (inside :func:`serial_kernels`)
    take it until the tempered kernel is compiled, which starts in a
    background thread once they have spent :data:`COMPILE_AFTER_ELEMENTS`
    work items on numpy.
"""

from __future__ import annotations

import contextlib
import os
import sys
import threading

__all__ = [
    "jit",
    "LazyDispatcher",
    "resolve_globals",
    "lazy_kernel",
    "launch",
    "launch_or_numpy",
    "numpy_first",
    "serial_kernels",
    "in_serial_kernels",
    "PARALLEL_MIN_ELEMENTS",
    "COMPILE_AFTER_ELEMENTS",
    "NUMPY_MAX_ELEMENTS",
]

#: Number of (row x class) work items from which a parallel launch is used.
#: Measured on the benchmark workloads: below this the thread wake-up costs
#: more than the rows.
PARALLEL_MIN_ELEMENTS = 1 << 15

#: Calls with fewer work items (rows x classes or columns) run a kernel's
#: numpy path: its compile cannot pay off on so few rows.
NUMPY_MAX_ELEMENTS = 1 << 12

#: Work items a process's passes may run on the numpy path of a kernel not yet
#: compiled before its compile starts (in a background thread).
COMPILE_AFTER_ELEMENTS = 1 << 22

_launch_lock = threading.Lock()
_compile_lock = threading.Lock()
_numpy_work: dict = {}
_parallel_forbidden = False
_thread_state = threading.local()


@contextlib.contextmanager
def serial_kernels():
    """Within the block, kernels launched from this thread run serially.

    For passes that already spread row spans over worker threads: a parallel
    kernel inside a worker would put numba's threads on the same cores.
    Nested use is allowed; the setting is per thread.
    """
    previous = getattr(_thread_state, "serial", False)
    _thread_state.serial = True
    try:
        yield
    finally:
        _thread_state.serial = previous


def in_serial_kernels() -> bool:
    """Whether this thread is inside :func:`serial_kernels` (a fit's pass)."""
    return getattr(_thread_state, "serial", False)


def _reset_after_fork() -> None:
    global _launch_lock, _parallel_forbidden
    # A lock held by another thread at fork time would stay held for ever.
    _launch_lock = threading.Lock()
    numba = sys.modules.get("numba")
    if numba is None:
        return
    try:
        layer = numba.threading_layer()
    except ValueError:
        # No layer started in the parent: the child may start its own.
        return
    if layer == "omp":
        _parallel_forbidden = True


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_reset_after_fork)


def jit(parallel: bool = False):
    """Return a decorator compiling a kernel lazily, cached when possible.

    Parameters
    ----------
    parallel : bool, default=False
        Build with ``parallel=True`` (``numba.prange`` loops run threaded).

    Returns
    -------
    decorator : callable
        Maps a Python function to a stand-in that imports numba and makes
        the numba dispatcher on first use (a call or any attribute), so that
        importing a kernel module does not import numba.  The dispatcher
        caches compiled code on disk when a writable cache directory exists
        and compiles in memory otherwise.
    """

    def decorate(func):
        return LazyDispatcher(func, parallel)

    return decorate


_dispatcher_lock = threading.RLock()


class LazyDispatcher:
    """A numba dispatcher made on first use; see :func:`jit`.

    Making it also replaces every stand-in among the kernel module's globals
    by its dispatcher, so that kernels calling kernels compile (numba reads
    the callee from the caller's globals).
    """

    def __init__(self, func, parallel):
        self.py_func = func
        self.__name__ = func.__name__
        self.__qualname__ = func.__qualname__
        self.__doc__ = func.__doc__
        self._parallel = parallel
        self._dispatcher = None

    def dispatcher(self):
        """The numba dispatcher (made, and numba imported, on the first call)."""
        if self._dispatcher is None:
            with _dispatcher_lock:
                if self._dispatcher is None:
                    self._dispatcher = _njit(self.py_func, parallel=self._parallel)
                    resolve_globals(self.py_func)
        return self._dispatcher

    def __call__(self, *args):
        return self.dispatcher()(*args)

    def __getattr__(self, name):
        return getattr(self.dispatcher(), name)


def resolve_globals(func):
    """Replace the :class:`LazyDispatcher` stand-ins among `func`'s globals by dispatchers."""
    namespace = func.__globals__
    with _dispatcher_lock:
        for name, value in list(namespace.items()):
            if isinstance(value, LazyDispatcher):
                namespace[name] = value.dispatcher()


def _njit(func, signature=None, parallel=False):
    """numba.njit(func), cached on disk when a cache directory is writable."""
    import numba

    args = () if signature is None else (signature,)
    try:
        return numba.njit(*args, cache=True, parallel=parallel, nogil=True)(func)
    except RuntimeError:
        # numba: "cannot cache function ...: no locator available".
        return numba.njit(*args, cache=False, parallel=parallel, nogil=True)(func)


def lazy_kernel(func, signature):
    """A callable that compiles ``func`` for one signature on its first call.

    For kernels that take the caller's arrays: an explicit signature typing
    them read-only accepts writable arrays too, so read-only input (pandas'
    ``to_numpy()``, a memory map) does not make a second compile, as it
    would for a lazily specialised ``jit`` kernel. Compiled once per
    process (thread-safe), cached on disk like :func:`jit`.

    Parameters
    ----------
    func : function
        The kernel's Python source (module level, so the disk cache works).
    signature : callable
        Returns the numba signature; called at the first compile only.

    Returns
    -------
    kernel : callable
        Calls the compiled kernel; ``kernel.dispatcher()`` returns the
        numba dispatcher (None before the first call).
    """
    lock = threading.Lock()
    compiled = []

    def dispatcher():
        return compiled[0] if compiled else None

    def kernel(*args):
        if not compiled:
            with lock:
                if not compiled:
                    resolve_globals(func)
                    compiled.append(_njit(func, signature()))
        return compiled[0](*args)

    kernel.dispatcher = dispatcher
    kernel.py_func = func
    return kernel


def launch(serial, parallel, work: int, *args):
    """Call the parallel build of a kernel when it pays and is safe.

    Parameters
    ----------
    serial, parallel : numba dispatchers
        Two builds of the same kernel, without and with ``parallel=True``.
    work : int
        Number of work items (rows times classes), used against
        :data:`PARALLEL_MIN_ELEMENTS`.
    *args
        Passed to the kernel.

    Returns
    -------
    result
        Whatever the kernel returns.
    """
    import numba

    if (
        work >= PARALLEL_MIN_ELEMENTS
        and not _parallel_forbidden
        and not getattr(_thread_state, "serial", False)
        and numba.get_num_threads() > 1
    ):
        lock = _launch_lock
        if lock.acquire(blocking=False):
            try:
                return parallel(*args)
            finally:
                lock.release()
    return serial(*args)


def launch_or_numpy(kernels, work: int, args, numpy_path):
    """Run a kernel, or its numpy path where a compile cannot pay off.

    Below :data:`NUMPY_MAX_ELEMENTS` work items: the numpy path.  Larger
    calls outside a fit's passes: :func:`launch` (compiling on the first
    call).  Larger calls inside :func:`serial_kernels` (the passes of a fit
    on worker threads): the serial kernel once it is compiled, else the
    numpy path (the two agree to rounding, so a large fit that switches
    over while it runs can differ in the last bits from one that does
    not); after :data:`COMPILE_AFTER_ELEMENTS` work items on numpy the
    kernel is compiled in a background thread (loaded, when the disk cache
    holds it), so a pass never waits for a compile.

    Parameters
    ----------
    kernels : callable
        Returns the (serial, parallel) numba dispatchers, as for
        :func:`launch`; called only when a kernel may run (their modules
        import numba).
    work : int
        Number of work items (rows times classes).
    args : callable
        Returns the kernel's arguments.
    numpy_path : callable
        Computes the same result without numba (called without arguments).

    Returns
    -------
    result
        Whatever the path taken returns.
    """
    if numpy_first(work):
        return numpy_path()
    serial, parallel = kernels()
    if not getattr(_thread_state, "serial", False):
        return launch(serial, parallel, work, *args())
    if getattr(serial, "signatures", True):
        return serial(*args())
    _count_numpy_work(serial, work, args)
    return numpy_path()


def _count_numpy_work(kernel, work, args):
    with _compile_lock:
        done = _numpy_work.get(kernel, 0)
        _numpy_work[kernel] = done + work
        if done >= COMPILE_AFTER_ELEMENTS or done + work < COMPILE_AFTER_ELEMENTS:
            return
    import numba

    signature = tuple(numba.typeof(arg) for arg in args())
    # A daemon thread: a process that ends meanwhile does not wait for it.
    threading.Thread(target=kernel.compile, args=(signature,), daemon=True).start()


def numpy_first(work: int) -> bool:
    """Whether a call of `work` items takes a kernel's numpy path.

    By size only (below :data:`NUMPY_MAX_ELEMENTS`), never by what the process
    compiled before, so that a call gives the same bits in every process.

    Parameters
    ----------
    work : int
        Work items of the call (rows, or rows times columns).

    Returns
    -------
    bool
    """
    return work < NUMPY_MAX_ELEMENTS
