"""Ending the ``pricefold`` process once its command is done, without Python's teardown.

After a command returns, the interpreter would still take every module apart (numba's compiled code,
pandas, pyarrow): 0.6–0.9 s measured here after a fit of the bundled sample or of 2M rows, whatever the
size of the data — as long again as reading 2M rows.  Nothing pricefold writes depends on that teardown:
results, rejects, ledger appends and reports are written, synced and renamed into place before the
command returns.  So the process ends at once (``os._exit``) after doing what a normal exit does that
anyone could see: the functions registered with ``atexit`` run, the standard streams are flushed.  While
another non-daemon thread is still running (it would be waited for), the normal exit is kept.
"""
from __future__ import annotations

import atexit
import os
import sys
import threading


def end_process(code: int) -> None:
    """Exit with ``code``: at once when nothing is left running, else as Python normally exits."""
    if any(thread is not threading.main_thread() and not thread.daemon and thread.is_alive()
           for thread in threading.enumerate()):
        sys.exit(code)
    atexit._run_exitfuncs()  # what a normal exit runs after waiting for the threads (none left)
    try:
        if sys.stdout is not None:
            sys.stdout.flush()
    except BrokenPipeError:
        pass  # the reader went away (``| head``): quiet, as ``cli.main`` is
    except (OSError, ValueError) as exc:  # a full disk: said, and not a success (Python's own exit: 120)
        print(f"pricefold: the output could not be written ({getattr(exc, 'strerror', None) or exc})",
              file=sys.stderr)
        code = code or 120
    try:
        if sys.stderr is not None:
            sys.stderr.flush()
    except (OSError, ValueError):
        pass
    os._exit(code)
