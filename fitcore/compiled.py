"""Compiled per-series loops (numba), compiled on first use.

A series' rows, its fold moments and its ≤ 6 × 6 Gram matrices fit in
registers and L1 cache, so one compiled pass per series replaces dozens of
numpy passes over a chunk.  Each loop lives beside the numpy code that calls
it (``fit.kernels`` and ``fit.lanes`` for the least-squares fits,
``fit.families.logvolume`` for the smearing, ``fit.families.poly`` for the
revenue peak, ``fit.basis``, ``fit.scores``, ``fit.shuffle``,
``fit.selection``, ``review.flags``); this module only defers the compiling.

Importing ``fitcore`` (say, to open a results file) then costs no numba
import (~0.2 s).  On the first call of any loop, every registered loop is
compiled (or loaded from the cache beside its file, or the user's cache
when that is read-only: the first run after an install takes a few seconds
longer) and bound wherever it was imported, so compiled loops call one
another directly.

numba compiles a loop once for each combination of its arguments' types (dtype,
dimensions, layout, writable or not); callers give each argument one type, inputs
as read-only views (``readonly``), so one compiled version serves them all.

Every loop uses ``error_model="numpy"`` (a division by zero gives inf or NaN,
as in numpy, for the caller to mask) and no ``fastmath``, so results are
plain IEEE arithmetic, the same on every machine.
"""
from __future__ import annotations

import functools
import sys
import threading

OPTIONS = {"cache": True, "nogil": True, "error_model": "numpy"}

_LOOPS: list = []  # (Python function, its first-call wrapper)
_COMPILING = threading.Lock()  # a fit behind the screen and the screen itself may both make the first call


def compiled(fn=None, *, inline: bool = False):
    """Mark ``fn`` as a loop to compile with ``OPTIONS`` when any loop is first called.

    ``inline=True`` (``@compiled(inline=True)``): a small helper that compiled loops call once per
    series or point; numba inlines its body into theirs, so such calls pay no array-argument
    reference counts (~0.1 µs each).
    """
    if fn is None:
        return functools.partial(compiled, inline=inline)

    @functools.wraps(fn)
    def first_call(*args):
        compile_all()
        return getattr(sys.modules[fn.__module__], fn.__name__)(*args)
    _LOOPS.append((fn, first_call, {"inline": "always"} if inline else {}))
    return first_call


def compile_all() -> None:
    """Compile every registered loop and put it where its wrapper was: its module and any importer."""
    with _COMPILING:
        if _LOOPS:
            _compile_registered()


def _compile_registered() -> None:
    import numba
    _load_implementations()
    done = {id(wrapper): numba.njit(**OPTIONS, **extra)(fn) for fn, wrapper, extra in _LOOPS}
    for name, module in list(sys.modules.items()):
        if name == "fitcore" or name.startswith("fitcore."):
            for attribute, value in list(vars(module).items()):
                if id(value) in done:
                    setattr(module, attribute, done[id(value)])
    _LOOPS.clear()


def _load_implementations() -> None:
    """Load numba's implementations, as its first compile or cache load would (``refresh``), with its check
    for a BLAS answered without importing ``scipy.linalg``.

    ``numba.np.arraymath`` asks at import whether a BLAS is there (``_HAVE_BLAS``: read only where numba
    compiles ``np.dot``-based inner products, which no loop here uses) by importing scipy's BLAS wrappers,
    and with them all of ``scipy.linalg``: 0.1 s of CPU, a quarter of numba's start on a fit that loads
    every loop from the cache.  Here the wrappers' file is looked for instead (``_blas_found``: the same
    answer wherever scipy is installed whole, as pricefold requires), then numba's own check back in place
    for anything compiled later.  Modules load in numba's order; already loaded, nothing happens."""
    import importlib.abc

    from numba.core.compiler_lock import global_compiler_lock
    from numba.core.registry import cpu_target
    if "numba.np.arraymath" in sys.modules:
        return

    class BlasFound(importlib.abc.MetaPathFinder):
        real = None

        def find_spec(self, name, path=None, target=None):
            linalg = sys.modules.get("numba.np.linalg")  # numba imports it first, then arraymath, which takes
            if (name == "numba.np.arraymath" and self.real is None  # its ensure_blas (another numba: nothing done)
                    and callable(getattr(linalg, "ensure_blas", None))):
                self.real, linalg.ensure_blas = linalg.ensure_blas, _blas_found
            return None  # the module itself found as usual

    finder = BlasFound()
    sys.meta_path.insert(0, finder)
    try:
        with global_compiler_lock:
            cpu_target.target_context.refresh()
    finally:
        sys.meta_path.remove(finder)
        if finder.real is not None:
            for name in ("numba.np.linalg", "numba.np.arraymath"):
                if getattr(sys.modules.get(name), "ensure_blas", None) is _blas_found:
                    sys.modules[name].ensure_blas = finder.real


def _blas_found() -> None:
    """numba's ``ensure_blas`` without importing scipy's BLAS wrappers: ImportError where their file is not
    found (where the import would fail), else numba's check of their integer width, as it makes it."""
    import importlib.machinery
    import importlib.util
    import os

    from numba.np import linalg
    spec = importlib.util.find_spec("scipy.linalg")  # imports ``scipy`` (numba did), not ``scipy.linalg``
    places = (spec.submodule_search_locations or []) if spec is not None else []
    if not any(os.path.isfile(os.path.join(place, "cython_blas" + suffix))
               for place in places for suffix in importlib.machinery.EXTENSION_SUFFIXES):
        raise ImportError("scipy 0.16+ is required for linear algebra")
    getattr(linalg, "_check_lapack_int_width", lambda: None)()


def readonly(array):
    """``array`` as a read-only view (no copy), for a compiled loop's input.

    numba compiles a loop once for every combination of its arguments' types, and an array's type
    includes whether it is writable: the owned, read-only arrays of a dataset or a results file and a
    fresh array of the same shape would each cost a compile on a fresh install and a load from the
    cache in every run that meets both.  Inputs given read-only everywhere make one compiled version
    serve every caller (``tests/fitcore/test_specialisations.py`` counts them).
    """
    view = array.view()
    view.flags.writeable = False
    return view


def looks_compiled(module: str = "kernels", loop: str = "family_fit") -> bool:
    """Whether numba's cache seems to hold the engine's largest loop (``loop`` of ``fitcore/fit/MODULE.py``:
    ``controlled_fit`` of ``controlled`` for fits with controls or season terms), compiled since its source last
    changed (so a fit now loads compiled code instead of compiling for ~10 s).  A guess from the cache's
    files, made without importing numba; where numba keeps them: ``$NUMBA_CACHE_DIR`` if set, else
    ``__pycache__`` beside the source, else the user's cache folder."""
    import hashlib
    import os
    from pathlib import Path
    source = Path(__file__).resolve().parent / "fit" / f"{module}.py"
    folder = str(source.parent)
    mirrored = f"{source.parent.name}_{hashlib.sha1(folder.encode()).hexdigest()}"
    if os.environ.get("NUMBA_CACHE_DIR"):
        places = [Path(os.environ["NUMBA_CACHE_DIR"]) / mirrored]
    else:
        user = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache") / "numba"
        places = [source.parent / "__pycache__", user / mirrored]
    try:
        changed = source.stat().st_mtime
        return any(index.stat().st_mtime >= changed for place in places
                   for index in place.glob(f"{source.stem}.{loop}-*.py{sys.version_info[0]}{sys.version_info[1]}.nbi"))
    except OSError:
        return False
