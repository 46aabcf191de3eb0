"""The screen's one precondition, asked before anything is written: a terminal on standard input and output."""
from __future__ import annotations

import sys


def require_terminal(command: str) -> None:
    """``SettingsError`` in one line unless standard input and output are a terminal: a screen drawn into a
    pipe would wait for a key nobody can press.  ``command``: what needs it, as the line says it."""
    if not (sys.stdin.isatty() and sys.stdout.isatty()):
        from fitcore.errors import SettingsError
        raise SettingsError(f"{command} needs a terminal (standard input and output); in scripts, "
                            "'pricefold fit', 'pricefold show' and 'pricefold ledger' read and write results and "
                            "decisions")
