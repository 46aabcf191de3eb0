"""A plan file's rows checked: the first fault as one line naming the file, the line, the column and what was
found there, worded as the data loader words the same fault.

A plan has no rejects file: a row that cannot be used stops the run.  An empty line (or one of empty cells)
carries no plan and is passed over, as a spreadsheet's export leaves them; in the data it is a rejected row,
counted, for the same reason: nothing in it can be used.
"""
from __future__ import annotations

import unicodedata
from pathlib import Path

import numpy as np

from ..errors import DataError
from ..text import clean, loose, quoted, reveal_unnormalised
from .validation import RawRows, empty_keys

PRICE = "plan_price"


def checked_rows(rows: RawRows, path: Path, kind: str, delimiter: str | None, *, controls: tuple[str, ...],
                 date: str | None) -> RawRows:
    """``rows`` without their empty lines, each remaining one naming a series with a price above zero and
    readable ``controls`` and ``date`` cells (empty ones leave the default); else ``DataError`` for the first
    fault, in this order: a line of the wrong number of fields, an empty key cell, the price, each control, the
    date."""
    def fault(mask: np.ndarray, expected: str, column: str | None = None, cell: bool = True) -> None:
        if mask.any():
            line = int(rows.line[int(np.argmax(mask))])
            found = found_cell(path, kind, delimiter, line, column) if column and cell else ""
            raise DataError(expected + found, path=str(path), line=line, column=column)

    if rows.broken:
        first = min(rows.broken)
        raise DataError(rows.broken[first], path=str(path), line=int(rows.line[first]))
    empty = empty_keys(rows)
    blank = np.logical_and.reduce([*empty.values(), *(rows.numbers[name][2] for name in (PRICE, *controls))])
    if date:
        values, unreadable, outside = rows.date
        blank &= np.isnat(values) & ~unreadable & ~outside
    if blank.any():
        rows = rows.subset(np.flatnonzero(~blank))
        empty = {name: mask[~blank] for name, mask in empty.items()}
        if not rows.n_rows:
            raise DataError("expected at least one plan line, found only empty lines", path=str(path))
    for name, mask in empty.items():
        fault(mask, "expected a key value, found an empty cell", name, cell=False)
    price, not_number, _ = rows.numbers[PRICE]
    fault(not_number | ~np.isfinite(price) | (price <= 0), "expected a price above zero", PRICE)
    for name in controls:
        values, not_number, missing = rows.numbers[name]
        fault(not_number | (~np.isfinite(values) & ~missing), "expected a number (or an empty cell for the default)",
              name)
    if date:
        fault(rows.date[1] | rows.date[2], "expected an ISO date (or an empty cell for the default)", date)
    return rows


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
    names = ", ".join(f"{clean(name)}={quoted(value)}" for name, value in key.items())
    said, column = f"no series in the data has this key ({names})", None
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
