"""Python's cyclic garbage collector paused while a command makes many objects that hold no cycles."""
from __future__ import annotations

import gc
from contextlib import contextmanager


@contextmanager
def collector_paused(freeze: bool = False):
    """No cyclic collection inside, as it was found after: reading a 100k-record ledger otherwise triggers
    hundreds of collections (a third of the time); numba's start and the imports beside a fit's read walked
    every module's objects again and again (256 collections, 0.07 s of CPU holding the interpreter); the triage
    screen's launch walked the modules' and the session's objects (≈ 0.05–0.1 s before the list: the screen
    collects once and freezes what the session holds when the list is drawn, ``tui.app.settle``).  ``freeze``:
    what was made lives until the command ends, so it is moved out of every later collection too."""
    paused = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if freeze:
            gc.freeze()
        if paused:
            gc.enable()
