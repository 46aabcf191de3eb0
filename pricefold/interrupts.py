"""Ctrl+C during ``pricefold fit``, seen once and never lost, and never raised where it can wedge a thread.

Python turns SIGINT into ``KeyboardInterrupt`` at the main thread's next step, wherever that is.  While
another thread of the fit runs (the warm-up, the engine's second chunk), that is unsafe: raised inside an
import's lock it left the module lock taken (the main thread then waited on it for ever), raised just after
numba's compiler lock was taken it left that lock held (the warm-up thread waited on it, and the main thread
on the warm-up), and raised inside pyarrow's conversion it was swallowed (the fit went on to write its
results).  So inside ``noticed`` a SIGINT is recorded, and raised at once only when the main thread is the
only one; otherwise ``check`` raises it at the next safe point (the data read, each fitted chunk, before
anything is put in place), and an error that follows a swallowed interrupt is reported as the interrupt.
"""
from __future__ import annotations

import signal
import threading
from contextlib import contextmanager

_seen = False


def _on_interrupt(signum, frame) -> None:
    global _seen
    _seen = True
    if threading.active_count() == 1:  # no other thread could wait on a lock this one leaves taken
        raise KeyboardInterrupt


@contextmanager
def noticed():
    """Record every SIGINT from here to the end of the block (main thread, Python's own handler in place:
    elsewhere nothing changes)."""
    global _seen
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGINT) is not signal.default_int_handler):
        yield
        return
    _seen = False
    previous = signal.signal(signal.SIGINT, _on_interrupt)
    try:
        yield
    except BaseException as exc:
        if _seen and not isinstance(exc, KeyboardInterrupt):
            raise KeyboardInterrupt from None
        raise
    finally:
        signal.signal(signal.SIGINT, previous)
        _seen = False


def check() -> None:
    """Raise ``KeyboardInterrupt`` if a SIGINT came inside ``noticed``, even one something swallowed."""
    if _seen:
        raise KeyboardInterrupt


def checked(progress):
    """``progress(done, total)`` (a chunk fitted) that first raises an interrupt recorded meanwhile."""
    def call(done: int, total: int) -> None:
        check()
        progress(done, total)
    return call


@contextmanager
def held():
    """SIGINT held back (blocked) for the block: a process forked inside it starts with SIGINT blocked and
    can ignore it before it could arrive; here, one that came meanwhile is delivered at the end."""
    try:
        blocked = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    except (AttributeError, OSError, ValueError):  # no signal masks here
        yield
        return
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, blocked)
