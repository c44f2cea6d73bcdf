"""Time bound for engine calls.

On the main thread of a POSIX process a SIGALRM timer interrupts a
computation that runs past its deadline and raises ``LimitError``.  Elsewhere
(threads, Windows) the input caps of ``parse`` are what keeps calls short.
``SHEETFUNCS_TIMEOUT`` (seconds) sets the default; 0 switches it off.
"""
from __future__ import annotations

import contextlib
import os
import signal
import threading

from ..errors import LimitError

DEFAULT_TIMEOUT = 20.0


def default_timeout() -> float:
    try:
        return float(os.environ.get("SHEETFUNCS_TIMEOUT", DEFAULT_TIMEOUT))
    except ValueError:
        return DEFAULT_TIMEOUT


@contextlib.contextmanager
def deadline(seconds: float | None = None):
    seconds = default_timeout() if seconds is None else seconds
    usable = (seconds and seconds > 0 and hasattr(signal, "SIGALRM")
              and threading.current_thread() is threading.main_thread()
              and signal.getitimer(signal.ITIMER_REAL)[0] == 0)
    if not usable:
        yield
        return

    def _expired(signum, frame):
        raise LimitError("computation time (seconds)", f"over {seconds:g}", f"{seconds:g}")

    previous = signal.signal(signal.SIGALRM, _expired)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
