"""Worker threads for the row passes, and the hold that keeps BLAS at one thread.

Passes over row spans (the design's gradient and Hessian passes, the range
scan of validation, the predictive moments) run as tasks on a small thread
pool of the process's own when they are large enough to pay
(``map_tasks``); the workers take the place of BLAS's own threads, which
are held at one while they run (``passes_own_threads``). The split of rows
into tasks (``task_span``) depends on n and the block size only, so sums
come out the same however many threads run them.
"""

import os
import threading
from concurrent.futures import ThreadPoolExecutor
from contextlib import ExitStack, contextmanager

_TASK_BLOCKS = 8  # blocks per parallel task; results are summed in task order
_MAX_WORKERS = 4  # the per-block Python work holds the GIL: more do not pay

_pool = None
_pool_workers = 0
_pool_lock = threading.Lock()
_controller = None
_held = threading.local()  # .threads: BLAS's own count while a fit holds it at 1


def _reset_after_fork():
    # The pool's threads do not exist in a forked child, nor does a fit
    # holding BLAS (the child keeps the BLAS setting it inherited).
    global _pool, _pool_workers, _pool_lock, _hold_lock, _hold_owner
    _pool, _pool_workers, _pool_lock = None, 0, threading.Lock()
    _hold_lock, _hold_owner = threading.Lock(), None


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_reset_after_fork)


def _blas_controller():
    global _controller
    if _controller is None:
        from threadpoolctl import ThreadpoolController

        _controller = ThreadpoolController()
    return _controller


def _blas_threads():
    """The BLAS thread count currently configured (1 if unknown)."""
    info = [m.num_threads for m in _blas_controller().lib_controllers if m.user_api == "blas"]
    return max(info) if info else 1


# One fit at a time holds BLAS at one thread: the first fit to start while
# no other holds it sets the limit, in its own thread, and restores it when
# it ends (threadpoolctl >= 3.8 lets only that thread change OpenBLAS's
# limit until its ``with`` block ends, and ignores the others silently).
# Fits that start meanwhile, in other threads, run
# under that hold and take the count it recorded for their workers. When
# every fit limited and restored on its own, two interleaved fits could
# leave BLAS at one thread for good (the second recorded the first's limit
# as the original; ``tests/test_concurrency.py`` checks it).
_hold_lock = threading.Lock()
_hold_owner = None  # ident of the thread whose fit set the limit
_hold_threads = 1  # BLAS's own count, recorded by that fit


@contextmanager
def passes_own_threads():
    """Hold BLAS at one thread for a whole fit; the passes' workers replace it.

    Lowering BLAS's thread count around every pass and restoring it after
    made the next small multi-threaded LAPACK call (the Cholesky of the
    Newton step) wait for OpenBLAS's threads to wake, far longer than the
    factor itself. Holding one thread from the
    start of a fit to its end removes that wait; the passes still use as
    many workers as BLAS was allowed threads (at most ``_MAX_WORKERS``).
    Nested use is a no-op. The BLAS setting is process-wide, as is
    threadpoolctl's: other threads' BLAS calls during the fit run on one
    thread too. Fits running at once in several threads share the hold of
    the one that started first; when that one ends first, the others finish
    with BLAS's threads back beside their workers (slower, never wrong).
    """
    global _hold_owner, _hold_threads
    if getattr(_held, "threads", None) is not None:
        yield
        return
    hold = ExitStack()
    with _hold_lock:
        if _hold_owner is None:
            threads = _blas_threads()
            if threads > 1:
                hold.enter_context(_blas_controller().limit(limits=1, user_api="blas"))
                _hold_owner, _hold_threads = threading.get_ident(), threads
        else:
            threads = _hold_threads
    _held.threads = threads
    try:
        yield
    finally:
        _held.threads = None
        if _hold_owner == threading.get_ident():
            with _hold_lock:
                hold.close()
                _hold_owner = None


def task_span(n, rows):
    """Rows per task: at most ``_TASK_BLOCKS`` blocks, in a multiple of four tasks.

    At least four tasks per pass when the data have four blocks, so that a
    subsample's pass (20,000 rows, say) still keeps every worker busy; and
    the tasks are of nearly equal size in a number divisible by 1, 2 and 4
    workers (five tasks of 8 blocks left one of two workers with far more
    blocks than the other). The split depends on n and the block
    size only, never on the worker count, so the sums are the same however
    many threads run them.
    """
    rows = max(rows, 1)
    blocks = -(-n // rows)
    tasks = -(-blocks // _TASK_BLOCKS)
    tasks = min(blocks, max(4, -(-tasks // 4) * 4))
    return rows * -(-blocks // tasks)


def row_spans(n, rows, span=None):
    """The (first, last) row ranges of a pass's tasks over n rows.

    ``span`` rows a task, by default :func:`task_span` ``(n, rows)``.
    """
    span = task_span(n, rows) if span is None else max(int(span), 1)
    return [(first, min(first + span, n)) for first in range(0, n, span)]


_SERIAL_WORK = 2e7  # flops below which a pass runs in the calling thread


def worker_count(n_tasks, work=None):
    """How many threads ``map_tasks`` uses for ``n_tasks`` tasks of ``work`` flops."""
    held = getattr(_held, "threads", None)
    threads = held if held is not None else _blas_threads()
    if work is not None and work < _SERIAL_WORK:
        return 1
    return max(1, min(threads, _MAX_WORKERS, n_tasks))


def map_tasks(func, tasks, fold=None, work=None, blas=True):
    """``[func(*t) for t in tasks]``, spread over threads when it pays.

    ``work``, the pass's approximate flop count, keeps small passes in the
    calling thread: handing tasks to workers and back costs as much as a
    whole small pass (figures in benchmarks/README.md).

    With ``fold``, the results are instead combined in task order as they
    arrive, ``acc = fold(acc, result)``, and ``acc`` is returned: at most a
    few results (about one per worker) are alive at once, which matters when
    each is a p x p Hessian.

    Each task runs single-threaded BLAS calls on its own rows; the workers
    take the place of BLAS's own threads (as many as BLAS was allowed, at
    most ``_MAX_WORKERS``). Many small multi-threaded BLAS calls synchronise
    their threads on every call, which costs dearly on a busy machine; whole
    tasks per thread do not. The results come back in task order, so their
    sum does not depend on scheduling. ``blas=False`` says the tasks make
    no BLAS calls (compiled kernels only): BLAS's thread count is then left
    alone.
    """
    global _pool, _pool_workers
    held = getattr(_held, "threads", None)
    workers = worker_count(len(tasks), work)
    if workers <= 1:
        # One thread, or one task: no thread-count change. Lowering and
        # restoring the BLAS thread count around a small pass made the next
        # small LAPACK call (the Cholesky of the Newton step) wait for
        # OpenBLAS's threads on a busy machine, longer than a small fit.
        return _collect((func(*t) for t in tasks), fold)
    with _pool_lock:
        if _pool is None or _pool_workers < workers:
            if _pool is not None:
                _pool.shutdown(wait=False)
            _pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="skbl")
            _pool_workers = workers
        pool = _pool
    if held is not None or not blas:
        return _collect(pool.map(lambda t: func(*t), tasks), fold)
    # Outside a fit, the pass takes the same shared hold as a fit does: a
    # limit of its own raced with other threads' passes as fits' did.
    with passes_own_threads():
        return _collect(pool.map(lambda t: func(*t), tasks), fold)


def _collect(results, fold):
    if fold is None:
        return list(results)
    acc = None
    for r in results:
        acc = r if acc is None else fold(acc, r)
    return acc
