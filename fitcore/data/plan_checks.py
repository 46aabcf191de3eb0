"""A plan file's rows checked: the first fault as one line naming the file, the line, the column and what was
found there, worded as the data loader words the same fault.

A plan has no rejects file: a row that cannot be used stops the run.  An empty line (or one of white space
only, as most CSV readers take it) carries no plan and is passed over; in the data it is a rejected row,
counted, for the same reason: nothing in it can be used.  A line of empty cells (``,,,``) is not an empty line:
it is a row, and its empty key stops the run.
"""
from __future__ import annotations

import itertools
import unicodedata
from pathlib import Path

import numpy as np

from ..errors import DataError
from ..text import clean, loose, quoted, reveal_unnormalised
from .textfile import open_text
from .validation import LARGEST, RawRows, empty_keys

PRICE = "plan_price"


def checked_rows(rows: RawRows, path: Path, kind: str, delimiter: str | None, *, controls: tuple[str, ...],
                 date: str | None) -> RawRows:
    """``rows`` without their empty lines, each remaining one naming a series with a price above zero and
    readable ``controls`` and ``date`` cells (empty ones leave the default), prices and controls within what the
    data may hold (``validation.LARGEST``); else ``DataError`` for the first fault, in this order: a line of the
    wrong number of fields, an empty key cell, the price, each control, the date."""
    def fault(column: str, *checks: tuple[np.ndarray, str], cell: bool = True) -> None:
        """The first line any of ``checks`` ((N,) mask, what was expected) marks, said as the first that marks it."""
        marked = [(int(np.argmax(mask)), expected) for mask, expected in checks if mask.any()]
        if marked:
            at, expected = min(marked, key=lambda mark: mark[0])  # a tie: the earlier check
            line = int(rows.line[at])
            found = found_cell(path, kind, delimiter, line, column) if cell else ""
            raise DataError(expected + found, path=str(path), line=line, column=column)

    if rows.broken:
        first = min(rows.broken)
        raise DataError(rows.broken[first], path=str(path), line=int(rows.line[first]))
    empty = empty_keys(rows)
    blank = np.logical_and.reduce([*empty.values(), *(rows.numbers[name][2] for name in (PRICE, *controls))])
    if date:
        values, unreadable, outside = rows.date
        blank &= np.isnat(values) & ~unreadable & ~outside
    cells = np.zeros(rows.n_rows, bool)  # a line of empty cells
    if blank.any():
        at = np.flatnonzero(blank)
        cells[at[_hold_cells(path, kind, rows.line[at])]] = True
        blank &= ~cells
        rows, cells = rows.subset(np.flatnonzero(~blank)), cells[~blank]
        empty = {name: mask[~blank] for name, mask in empty.items()}
        if not rows.n_rows:
            raise DataError("expected at least one plan line, found only empty lines", path=str(path))
    for name, mask in empty.items():
        said = "expected a key value, found an empty cell"
        fault(name, (mask & ~cells, said), (mask & cells, said + " (every cell of this line is empty)"), cell=False)
    price, not_number, _ = rows.numbers[PRICE]
    fault(PRICE, (not_number | ~np.isfinite(price) | (price <= 0), "expected a price above zero"),
          (np.isfinite(price) & (price > LARGEST), "expected a price of at most 1e15"))
    for name in controls:
        values, not_number, missing = rows.numbers[name]
        fault(name, (not_number | (~np.isfinite(values) & ~missing), "expected a number (or an empty cell for the "
                                                                     "default)"),
              (np.isfinite(values) & (np.abs(values) > LARGEST),
               "expected a number within ±1e15 (or an empty cell for the default)"))
    if date:
        fault(date, (rows.date[1] | rows.date[2], "expected an ISO date (or an empty cell for the default)"))
    return rows


def _hold_cells(path: Path, kind: str, lines: np.ndarray) -> np.ndarray:
    """(B,) bool: which of ``lines`` (sorted; rows whose cells are all empty) hold cells, as ``,,,`` does, rather
    than nothing, as an empty line or one of white space only (``read_csv.is_blank``).  A Parquet row always
    holds cells."""
    if kind == "parquet":
        return np.ones(len(lines), bool)
    from .read_csv import is_blank
    wanted = dict.fromkeys(lines.tolist(), False)
    with open_text(path, errors="surrogateescape") as handle:
        for number, text in enumerate(itertools.islice(handle, 1, int(lines[-1])), 2):
            if number in wanted:
                wanted[number] = not is_blank(text)
    return np.fromiter(wanted.values(), bool, len(wanted))


def repeated_series(path: Path, line: int, earlier: int, key: dict) -> DataError:
    """The error for a plan ``line`` naming the series (``key``: column → text) of the ``earlier`` line."""
    return DataError(f"expected one plan line per series, found a second for {_key_words(key)} (the first is on "
                     f"line {earlier})", path=str(path), line=line)


def _key_words(key: dict) -> str:
    """"product='apples', region='North'": a series' key as an error names it."""
    return ", ".join(f"{clean(name)}={quoted(value)}" for name, value in key.items())


def found_cell(path: Path, kind: str, delimiter: str | None, line: int, column: str) -> str:
    """', found '2,20' (a decimal comma? …)': the cell of ``column`` on ``line`` as written (CSV only; '' else)."""
    from .loader import decimal_comma_hint
    from .rejects import Rejects, first_cell
    cell = first_cell(Rejects(path, kind, delimiter, np.array([line]), [""]), column)
    return "" if cell is None else f", found {quoted(cell)}{decimal_comma_hint(cell)}"


def unknown_key(path: Path, line: int, key: dict, data_keys: dict) -> DataError:
    """The error for a plan ``line`` whose ``key`` (column → text) names no series of the data (``data_keys``:
    column → (S,) texts).  The first column whose value no series has is named, with the data's value that
    reads alike loosely (case, white space, Unicode form: ``fitcore.text.loose``) when there is one."""
    said, column = f"no series in the data has this key ({_key_words(key)})", None
    broken = next((name for name, value in key.items() if "\n" in value or "\r" in value), None)
    if broken is not None:  # the data may hold such a key (both read it as this reader does): only said
        said += f"; its {clean(broken)} holds a line break (a quote that closes on a later line than it opens)"
    for name, value in key.items():
        known = dict.fromkeys(np.asarray(data_keys[name]).astype(str).tolist())  # in the data's order
        if value not in known:
            column = name
            wanted = loose(value)
            alike = next((other for other in known if loose(other) == wanted), None)
            if alike is not None:
                said += f"; did you mean {_alike(value, alike)}?"
            break
    else:  # each value is in the data, not together: a series whose key reads alike, spelled otherwise?
        wanted = tuple(loose(value) for value in key.values())
        columns = [np.asarray(data_keys[name]).astype(str).tolist() for name in key]
        theirs = next((values for values in zip(*columns) if tuple(map(loose, values)) == wanted), None)
        if theirs is not None:
            differ = [(name, ours, other) for (name, ours), other in zip(key.items(), theirs) if ours != other]
            column = differ[0][0]
            hints = ", ".join(f"{clean(name)}={_alike(ours, other)}" for name, ours, other in differ)
            said += f"; did you mean {hints}?"
    return DataError(said, path=str(path), line=line, column=column)


def _alike(typed: str, found: str) -> str:
    """The data's value ``found`` quoted as a hint for ``typed``; where the two differ only in Unicode form (they
    print the same), the one not in NFC form shown by code point (``fitcore.text.reveal_unnormalised``)."""
    ours, theirs = clean(typed), clean(found)
    if unicodedata.normalize("NFC", ours) != unicodedata.normalize("NFC", theirs):
        return quoted(found)  # case or spaces: visible between the quotes
    if reveal_unnormalised(theirs) != theirs:
        return f"'{reveal_unnormalised(theirs)}' (another Unicode form)"
    return f"'{theirs}' (composed; the plan's is '{reveal_unnormalised(ours)}')"
