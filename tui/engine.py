"""The engine's compiled loops, loaded behind the screen.

Drawing a curve evaluates it with a compiled loop; the first such call starts numba and loads the
cached loops (0.4–0.7 s here), which on the first frame held the whole screen back.  The app loads them
off the UI thread (with the first fit of the data, or in a worker), and the evidence draws its curves
once they are in (``loaded``).
"""
from __future__ import annotations

import threading

import numpy as np

_LOADED = threading.Event()


def load() -> None:
    """Start numba and load the loop that draws curves (the fit behind the screen loads the rest); once."""
    if _LOADED.is_set():
        return
    from fitcore.fit.basis import polynomial
    polynomial(np.zeros(1), np.zeros(1))
    _LOADED.set()


def loaded() -> bool:
    return _LOADED.is_set()
