"""Ctrl-C and SIGTERM as exceptions, so that a run can clean up and exit with one line.

Python turns Ctrl-C (SIGINT) into ``KeyboardInterrupt``; SIGTERM kills the
process by default, with no chance to remove a half-written output. Inside
:func:`terminate_as_exception` SIGTERM raises :class:`Terminated` instead.
The exit codes follow the shell's convention, 128 + the signal number.
"""

import os
import signal
import threading
from contextlib import contextmanager

EXIT_INTERRUPTED = 128 + signal.SIGINT
EXIT_TERMINATED = 128 + signal.SIGTERM


class Terminated(BaseException):  # noqa: N818 - named for the event, like KeyboardInterrupt
    """Raised in the main thread when the process receives SIGTERM."""


def _raise_terminated(signum, frame):
    raise Terminated()


@contextmanager
def terminate_as_exception():
    """Inside the block, SIGTERM raises :class:`Terminated` (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, old)


@contextmanager
def signals_held():
    """Hold Ctrl-C and SIGTERM until the block ends, then deliver the first one.

    Blocking the signals with a thread mask is not enough: the kernel hands a
    process's signal to any thread that does not block it (a worker thread),
    and Python then runs the handler in the main thread all the same. So the
    block swaps the handlers for ones that only note the signal. Outside the
    main thread (where handlers cannot be set) the block holds nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    noted = []
    held = (signal.SIGINT, signal.SIGTERM)
    old = {signum: signal.signal(signum, lambda signum, frame: noted.append(signum))
           for signum in held}  # fmt: skip
    try:
        yield
    finally:
        for signum, handler in old.items():
            signal.signal(signum, handler)
        if noted:
            signal.raise_signal(noted[0])


def exit_quietly_on_signals():
    """From now on Ctrl-C or SIGTERM end the process at once, with no traceback.

    For the interpreter's shutdown after a finished command: its output is
    complete, so a late signal only needs to end the process with its code.
    """
    signal.signal(signal.SIGINT, lambda signum, frame: os._exit(EXIT_INTERRUPTED))
    signal.signal(signal.SIGTERM, lambda signum, frame: os._exit(EXIT_TERMINATED))
