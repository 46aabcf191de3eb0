"""Errors raised by pricefold.

Hierarchy::

    PricefoldError                      base of everything pricefold raises on purpose
    ├── SettingsError(…, ValueError)    an option or setting out of range, or settings that clash
    └── DataError(…, ValueError)        an input file that cannot be used; carries file, row, column

Numerical trouble inside a series (too few points, a flat price, rank
deficiency) is never an exception: it is recorded in that series' result.
"""
from __future__ import annotations

from .text import quoted


class PricefoldError(Exception):
    """Base class: the command line prints these as one line, without a traceback."""


class SettingsError(PricefoldError, ValueError):
    """A setting is out of range or contradicts another one."""


class DataError(PricefoldError, ValueError):
    """An input file cannot be used as given.

    ``path``, ``line`` (1-based, the header is line 1) or ``row`` (a Parquet file's, from 1) and ``column``
    say where, when known; the message says what was expected and what was found.
    """

    def __init__(self, message: str, *, path: str | None = None,
                 line: int | None = None, column: str | None = None, row: int | None = None) -> None:
        self.path, self.line, self.column, self.row = path, line, column, row
        where = ", ".join(part for part in (
            str(path) if path else None,
            f"line {line}" if line is not None else None,
            f"row {row}" if row is not None else None,
            f"column {quoted(column)}" if column else None) if part)
        super().__init__(f"{where}: {message}" if where else message)


# pyarrow's words for a damaged Parquet file, and what they mean to a user
_PLAIN = (("CRC checksum verification failed", "a page's checksum does not match its contents: the file was "
                                               "damaged or changed after it was written"),
          ("Invalid base64 input", "its stored schema is unreadable: the file was damaged or changed after it was "
                                   "written"))


def first_line(exc: BaseException) -> str:
    """The first line of an exception's message (a library's may span several), or its type's name; a
    damaged file's checksum or schema said in plain words."""
    text = str(exc).strip()
    for words, plain in _PLAIN:
        if words in text:
            return plain
    return text.splitlines()[0] if text else type(exc).__name__
