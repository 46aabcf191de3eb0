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


def load_charts() -> None:
    """Import what the first chart with observations needs: scipy's Student-t quantile for the prediction band
    (0.3–0.35 s to import) and plotext (0.1 s), which that chart imported on the UI thread.  From a thread of
    its own, started as the data are read; a chart drawn meanwhile waits for the import (Python's import
    lock).  Only imported here: every chart is still built on the UI thread (plotext has one global figure)."""
    import plotext  # noqa: F401
    import scipy.special  # noqa: F401


def loaded() -> bool:
    return _LOADED.is_set()
