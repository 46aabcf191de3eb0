"""The screen's terminal: asked before anything is written (standard input and output a terminal), and standard
error put on it while the screen is drawn."""
from __future__ import annotations

import contextlib
import sys


def require_terminal(command: str) -> None:
    """``SettingsError`` in one line unless standard input and output are a terminal: a screen drawn into a
    pipe would wait for a key nobody can press.  ``command``: what needs it, as the line says it."""
    import os
    from fitcore.errors import SettingsError
    if not all(stream is not None and stream.isatty() for stream in (sys.stdin, sys.stdout)):
        raise SettingsError(f"{command} needs a terminal (standard input and output); in scripts, "
                            "'pricefold fit', 'pricefold show' and 'pricefold ledger' read and write results and "
                            "decisions")
    if os.environ.get("TERM") == "dumb":  # (an editor's shell buffer, a CI log): it would get escapes as text
        raise SettingsError(f"{command} needs a terminal that can draw a screen, and TERM is 'dumb' here; set TERM "
                            "to the terminal's type (e.g. TERM=xterm-256color) or read the results with "
                            "'pricefold show'")


@contextlib.contextmanager
def drawn_on_the_terminal():
    """For the screen's time, standard error is the terminal of standard output where it is not one.  Textual
    draws on standard error: redirected (``2>file``, ``2>/dev/null``) the screen went into the file, unseen,
    while its keys still recorded decisions; closed (``2>&-``) it hung until ``kill -9`` (a trial).  What the
    command says after the screen goes where standard error went."""
    import os
    if os.isatty(2):
        yield
        return
    for stream in (sys.stdout, sys.stderr, sys.__stderr__):
        if stream is not None:
            stream.flush()
    saved = os.dup(2)
    os.dup2(1, 2)
    original = sys.__stderr__
    if original is None or original.fileno() != 2:  # (closed by the shell: Python made none)
        sys.__stderr__ = open(2, "w", encoding="utf-8", closefd=False)
    try:
        yield
    finally:
        for stream in (sys.stderr, sys.__stderr__):
            try:
                stream.flush()
            except (OSError, ValueError):
                pass
        os.dup2(saved, 2)
        os.close(saved)
        sys.__stderr__ = original
