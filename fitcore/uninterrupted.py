"""A few steps that must end whole once begun (a ledger append's write and fsync, a report renamed into place),
with SIGINT, SIGTERM and SIGHUP held back until they have.

A signal that comes inside ``uninterrupted`` is acted on at the block's end as it would have been on arrival:
its handler called (Python's ``KeyboardInterrupt`` for Ctrl+C, pricefold's own where the command set one), or
its default action (the process ends).  So Ctrl+C, a ``kill`` or a closed SSH session never leaves half an
append behind: the records are in, whole and synced, or not begun.  ``kill -9`` and a power cut still can —
the ledger's reader handles that tail (``fitcore.ledger.files.set_aside``).  Only the main thread can set
handlers; elsewhere the block runs as it is (Python runs handlers on the main thread only, so a signal cannot
stop the block there; it can still end the process, by its default action).
"""
from __future__ import annotations

import signal
import threading
from contextlib import contextmanager

HELD = ("SIGINT", "SIGTERM", "SIGHUP")


@contextmanager
def uninterrupted():
    """SIGINT, SIGTERM and SIGHUP held for the block, each then acted on once as on arrival (see above)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    came: dict[int, object] = {}  # each signal once, as the system keeps one pending signal of a kind
    previous = {}
    for name in HELD:
        number = getattr(signal, name, None)
        if number is not None:
            previous[number] = signal.signal(number, lambda signum, frame: came.setdefault(signum, frame))
    try:
        yield
    finally:
        for number, handler in previous.items():
            signal.signal(number, handler if handler is not None else signal.SIG_DFL)
        for number in sorted(came, key=lambda n: callable(previous[n])):  # a default action before a raise
            handler = previous[number]
            if callable(handler):
                handler(number, came[number])
            elif handler != signal.SIG_IGN:
                signal.raise_signal(number)
