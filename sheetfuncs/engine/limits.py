"""Time bound for engine calls, on every OS and in every thread.

``deadline(seconds)`` sets a deadline for the calls inside it.  The engine's
own loops (factoring, root polishing, partial fractions, the dead-time
series, sampling, root finding) call :func:`check`, which raises
``LimitError`` once the deadline has passed: this cooperative bound works on
Windows, in worker threads and in a browser Python alike.  Long calls into
SymPy cannot be interrupted that way, so on the main thread of a POSIX
process a SIGALRM timer backs the bound up.  ``SHEETFUNCS_TIMEOUT``
(seconds) sets the default; 0 switches it off.
"""
from __future__ import annotations

import contextlib
import contextvars
import os
import threading
import time

from ..errors import LimitError

DEFAULT_TIMEOUT = 20.0

_deadline: contextvars.ContextVar[tuple | None] = contextvars.ContextVar("sheetfuncs_deadline",
                                                                          default=None)


def default_timeout() -> float:
    try:
        return float(os.environ.get("SHEETFUNCS_TIMEOUT", DEFAULT_TIMEOUT))
    except ValueError:
        return DEFAULT_TIMEOUT


def _expired_error(seconds: float) -> LimitError:
    return LimitError("computation time (seconds)", f"over {seconds:g}", f"{seconds:g}")


def check() -> None:
    """Raise ``LimitError`` when the current deadline has passed (cheap: call it in loops)."""
    d = _deadline.get()
    if d is not None and time.monotonic() > d[0]:
        raise _expired_error(d[1])


def remaining() -> float | None:
    """Seconds left before the current deadline (None when unbounded)."""
    d = _deadline.get()
    return None if d is None else d[0] - time.monotonic()


@contextlib.contextmanager
def deadline(seconds: float | None = None):
    seconds = default_timeout() if seconds is None else seconds
    if not seconds or seconds <= 0:
        yield
        return
    outer = _deadline.get()
    end = time.monotonic() + seconds
    if outer is not None and outer[0] <= end:      # an enclosing, earlier deadline stays in force
        yield
        return
    token = _deadline.set((end, seconds))
    try:
        with _alarm(seconds):
            yield
    finally:
        _deadline.reset(token)


@contextlib.contextmanager
def _alarm(seconds: float):
    """SIGALRM backup on the main thread of a POSIX process (interrupts SymPy)."""
    try:
        import signal
    except ImportError:          # pragma: no cover - a Python without signals
        yield
        return
    usable = (hasattr(signal, "SIGALRM") and threading.current_thread() is threading.main_thread()
              and signal.getitimer(signal.ITIMER_REAL)[0] == 0)
    if not usable:
        yield
        return

    def _expired(signum, frame):
        raise _expired_error(seconds)

    previous = signal.signal(signal.SIGALRM, _expired)
    signal.setitimer(signal.ITIMER_REAL, seconds + 0.05)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
