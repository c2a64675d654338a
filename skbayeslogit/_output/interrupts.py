"""Ctrl-C and SIGTERM as exceptions, so that a run can clean up and exit with one line.

Python turns Ctrl-C (SIGINT) into ``KeyboardInterrupt``; SIGTERM kills the
process by default, with no chance to remove a half-written output. Inside
:func:`terminate_as_exception` SIGTERM raises :class:`Terminated` instead.
The exit codes follow the shell's convention, 128 + the signal number.
"""

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
    """Hold Ctrl-C and SIGTERM until the block ends (they are delivered after it)."""
    held = {signal.SIGINT, signal.SIGTERM}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)
