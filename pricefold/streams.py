"""The standard streams as a command finds them: closed by the shell, or in a locale that cannot spell pricefold's
words.  Set up once, before the command runs (``cli.entry``).

- A stream closed by the shell (``>&-``, ``2>&-``) is None in Python, and its descriptor is free: the next file
  opened would take it, and anything writing to "standard output" by number (a library, a child process) would
  write into that file — a results file, say.  Each closed one of 0, 1, 2 is opened on the null device first.
  Standard output closed is then an output that fails when written (the command ends in one line, exit 74,
  instead of printing nothing and exiting 0, or a traceback); standard error closed is the null device (the
  command runs as with ``-q``; before, ``fit`` exited 1 without a word).
- In a locale whose encoding lacks a character pricefold writes (``·``, ``→``, ``⟨U+0020⟩``), standard output
  writes it as a backslash escape, as Python's standard error already does, instead of ending in a
  ``UnicodeEncodeError`` (``show`` in an ASCII locale: a trial).
"""
from __future__ import annotations

import errno
import os
import sys


class ClosedOutput:
    """Standard output the shell closed: every write fails (``cli.main`` says so in one line, exit 74)."""

    closed_by_shell = True

    def write(self, text: str) -> int:
        raise OSError(errno.EBADF, "standard output is closed (>&-): there is nowhere to write the output")

    def flush(self) -> None:
        pass

    def isatty(self) -> bool:
        return False

    def fileno(self) -> int:
        return 1


def set_up() -> None:
    for fd in (0, 1, 2):
        try:
            os.fstat(fd)
        except OSError:
            os.open(os.devnull, os.O_RDWR)  # the lowest free descriptor: this one
    if sys.stdout is None:
        sys.stdout = ClosedOutput()
    if sys.stderr is None:
        sys.stderr = open(os.devnull, "w", encoding="utf-8")
    encoding = (getattr(sys.stdout, "encoding", None) or "").lower().replace("-", "").replace("_", "")
    if encoding and encoding != "utf8" and hasattr(sys.stdout, "reconfigure"):
        sys.stdout.reconfigure(errors="backslashreplace")
