"""A plan file's rows checked: the first fault as one line naming the file, the line, the column and what was
found there, worded as the data loader words the same fault.

A plan has no rejects file: a row that cannot be used stops the run.  An empty line (or one of white space
only, as most CSV readers take it; the readers say which, ``validation.EMPTY_LINE``) carries no plan and is
passed over; in the data it is a rejected row, counted, for the same reason: nothing in it can be used.  A line
of empty cells (``,,,``) is not an empty line: it is a row, and its empty key stops the run.  A Parquet plan's
rows are named by their row number (``row 4``), as the data loader names a Parquet file's.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import DataError
from ..text import clean, hint_for, loose, quoted, reveal_unnormalised, same_print
from .loader import place
from .validation import EMPTY_LINE, FIRST_DAY, LAST_DAY, LARGEST, RawRows, empty_keys

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
            raise DataError(expected + found, path=str(path), column=column, **place(kind, line))

    faults = {index: why for index, why in rows.broken.items() if why != EMPTY_LINE}
    if faults:
        first = min(faults)
        raise DataError(faults[first], path=str(path), **place(kind, int(rows.line[first])))
    if rows.broken:  # empty lines: passed over
        rows = rows.subset(np.setdiff1d(np.arange(rows.n_rows), np.fromiter(rows.broken, np.int64)))
        if not rows.n_rows:
            raise DataError("expected at least one plan line, found only empty lines", path=str(path))
    empty = empty_keys(rows)
    cells = np.logical_and.reduce([*empty.values(), *(rows.numbers[name][2] for name in (PRICE, *controls))])
    if date:  # a row of empty cells
        values, unreadable, outside = rows.date
        cells &= np.isnat(values) & ~unreadable & ~outside
    for name, mask in empty.items():
        said = "expected a key value, found an empty cell"
        every = f" (every cell of this {'row' if kind == 'parquet' else 'line'} is empty)"
        fault(name, (mask & ~cells, said), (mask & cells, said + every), cell=False)
    price, not_number, _ = rows.numbers[PRICE]
    fault(PRICE, (not_number | np.isnan(price) | (price <= 0), "expected a price above zero"),
          (~not_number & (price > LARGEST), "expected a price of at most 1e15"))  # inf too
    for name in controls:
        values, not_number, missing = rows.numbers[name]
        fault(name, (not_number | (~np.isfinite(values) & ~missing), "expected a number (or an empty cell for the "
                                                                     "default)"),
              (np.isfinite(values) & (np.abs(values) > LARGEST),
               "expected a number within ±1e15 (or an empty cell for the default)"))
    if date:
        fault(date, (rows.date[1], "expected an ISO date (or an empty cell for the default)"),
              (rows.date[2], f"expected an ISO date within {FIRST_DAY} to {LAST_DAY} (the dates the date type "
                             "holds, as for the data; or an empty cell for the default)"))
    return rows


def repeated_series(path: Path, kind: str, line: int, earlier: int, key: dict) -> DataError:
    """The error for a plan ``line`` naming the series (``key``: column → text) of the ``earlier`` line."""
    first = f"row {earlier}" if kind == "parquet" else f"on line {earlier}"
    return DataError(f"expected one plan line per series, found a second for {_key_words(key)} (the first is "
                     f"{first})", path=str(path), **place(kind, line))


def _key_words(key: dict, shown: dict | None = None) -> str:
    """"product='apples', region='North'": a series' key as an error names it; ``shown``: column → a value's
    quoted form where it is not ``quoted``'s."""
    shown = shown or {}
    return ", ".join(f"{clean(name)}={shown.get(name) or quoted(value)}" for name, value in key.items())


def found_cell(path: Path, kind: str, delimiter: str | None, line: int, column: str) -> str:
    """', found '2,20' (a decimal comma? …)': the cell of ``column`` on ``line`` as written (a Parquet file's: its
    value, or a null)."""
    from .loader import decimal_comma_hint
    from .rejects import Rejects, first_cell
    if kind == "parquet":
        import pyarrow.parquet as pq
        value = pq.read_table(path, columns=[column]).column(column)[line - 1].as_py()
        return ", found a null" if value is None else f", found {quoted(value)}"
    cell = first_cell(Rejects(path, kind, delimiter, np.array([line]), [""]), column)
    return "" if cell is None else f", found {quoted(cell)}{decimal_comma_hint(cell)}"


def unknown_key(path: Path, kind: str, line: int, key: dict, data_keys: dict) -> DataError:
    """The error for a plan ``line`` whose ``key`` (column → text) names no series of the data (``data_keys``:
    column → (S,) texts).  The first column whose value no series has is named, with the data's value that
    reads alike loosely (case, white space, Unicode form: ``fitcore.text.loose``) when there is one; a plan's
    value that prints as the data's (another Unicode form) is shown by code point in the key too."""
    column, differ, by_name = None, [], False
    for name, value in key.items():
        known = dict.fromkeys(np.asarray(data_keys[name]).astype(str).tolist())  # in the data's order
        if value not in known:
            column = name
            wanted = loose(value)
            alike = next((other for other in known if loose(other) == wanted), None)
            differ = [] if alike is None else [(name, value, alike)]
            break
    else:  # each value is in the data, not together: a series whose key reads alike, spelled otherwise?
        wanted = tuple(loose(value) for value in key.values())
        columns = [np.asarray(data_keys[name]).astype(str).tolist() for name in key]
        theirs = next((values for values in zip(*columns) if tuple(map(loose, values)) == wanted), None)
        if theirs is not None:
            differ = [(name, ours, other) for (name, ours), other in zip(key.items(), theirs) if ours != other]
            column, by_name = differ[0][0], True
    shown = {name: _told_apart(ours, other) for name, ours, other in differ}
    said = f"no series in the data has this key ({_key_words(key, shown)})"
    broken = next((name for name, value in key.items() if "\n" in value or "\r" in value), None)
    if broken is not None:  # the data may hold such a key (both read it as this reader does): only said
        said += f"; its {clean(broken)} holds a line break (a quote that closes on a later line than it opens)"
    if differ:
        hints = [(f"{clean(name)}=" if by_name else "") + hint_for(ours, other) for name, ours, other in differ]
        said += f"; did you mean {', '.join(hints)}?"
    return DataError(said, path=str(path), column=column, **place(kind, line))


def _told_apart(typed: str, found: str) -> str | None:
    """The plan's value ``typed`` quoted beside the data's ``found``, by code point where it is the one not in NFC
    form of two that print the same (``fitcore.text.reveal_unnormalised``); None: as ``quoted`` shows it."""
    ours = clean(typed)
    return f"'{reveal_unnormalised(ours)}'" if same_print(typed, found) and reveal_unnormalised(ours) != ours \
        else None
