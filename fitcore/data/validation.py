"""Row-level validation: why each row cannot be used, or that it can (pure; no file access).

A row is rejected — never silently dropped — when the line is empty or has
the wrong number of fields, a key is empty, price or volume is missing,
non-numeric, NaN or infinite, negative, or beyond ±1e15 (``LARGEST``; controls
too), the weight is missing, non-numeric
or negative, the date does not parse or lies outside the dates datetime64[ns]
holds (1677-09-22 to 2262-04-11), or the row repeats the series and date of an
earlier row.  The first reason that applies is the one reported.
"""
from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

FIRST_DAY, LAST_DAY = "1677-09-22", "2262-04-11"  # the whole days datetime64[ns] holds
# The largest magnitude of a price, volume or control the arithmetic carries: sums of squared volumes
# (CV errors, intervals) and revenue = price × volume over millions of rows must stay far inside float64
# (1e308); past about 1e154 a square is infinite and a series silently gets no model.  1e15 is also
# below 2**53, so whole numbers up to it are exact; no real price or weekly volume comes near it.
LARGEST = 1e15


@dataclass
class RawRows:
    """The needed columns of every data row, as read, before any check.

    ``line``: (N,) line of each row in the file (header = line 1; Parquet: row number).
    ``keys``: name → (N,) ``pd.Categorical`` of the key's text (missing where the cell was empty).
    ``numbers``: name → ((N,) float64, NaN where missing or unreadable; (N,) bool "text that is not a
    number"; (N,) bool "empty cell").
    ``date``: ((N,) datetime64[ns] with NaT where missing, unreadable or outside, (N,) bool "text that is not a
    date", (N,) bool "a date outside what datetime64[ns] holds") or None.
    ``broken``: row index → reason, for rows whose line could not be split into the header's fields.
    """

    line: np.ndarray
    keys: dict
    numbers: dict
    date: tuple | None = None
    broken: dict = field(default_factory=dict)

    @property
    def n_rows(self) -> int:
        return len(self.line)


def reasons(rows: RawRows, price: str, volume: str, weight: str | None,
            date: str | None, duplicates: bool = True, controls: tuple[str, ...] = ()) -> tuple[np.ndarray, np.ndarray]:
    """``(why, usable)``: (N,) the reason each row is rejected (None for a usable row), and (N,) bool usable.

    ``duplicates=False`` leaves the repeated series-and-date check to the caller (``duplicate_rows``), for
    rows read in pieces whose repeats may lie in another piece.  ``controls``: the control columns, each
    missing, non-numeric or non-finite cell a reason (controls may be negative).
    """
    n = rows.n_rows
    out = None  # the reasons, made at the first rejected row: a clean file needs no N-object array
    open_rows = np.ones(n, dtype=bool)  # no reason given yet

    def reject(index, text):
        nonlocal out
        if out is None:
            out = np.full(n, None, dtype=object)
        out[index] = text
        open_rows[index] = False

    def mark(mask, text):
        mask = np.asarray(mask, dtype=bool) & open_rows
        if mask.any():
            reject(mask, text)

    for index, why in rows.broken.items():
        reject(index, why)
    empties = [_empty(values) for values in rows.keys.values()]
    all_empty = np.logical_and.reduce(empties) if empties else np.zeros(n, bool)
    for name in (price, volume, weight):
        if name:
            all_empty &= rows.numbers[name][2]
    mark(all_empty, "empty line")
    for name, empty in zip(rows.keys, empties):
        mark(empty, f"empty {name}")
    for name in (price, volume, weight):
        if name:  # a weight scales sums instead of entering them: its overflow has its own reason
            _number_reasons(mark, name, *rows.numbers[name], bounded=name != weight)
    for name in controls:
        _number_reasons(mark, name, *rows.numbers[name], signed=True)
    if date and rows.date is not None:
        values, unreadable, outside = rows.date
        mark(unreadable, f"unparseable {date}")
        mark(outside, f"{date} outside {FIRST_DAY} to {LAST_DAY}")
        mark(np.isnat(values), f"missing {date}")
        if duplicates:
            _duplicates(rows, values, reject, open_rows)
    if out is None:  # every row usable: a read-only view of one None
        out = np.broadcast_to(np.array(None, dtype=object), (n,))
    return out, open_rows


def _empty(values: pd.Categorical) -> np.ndarray:
    blank = np.asarray([str(c).strip() == "" for c in values.categories], dtype=bool)
    codes = values.codes
    if len(blank) and not blank.any():
        return codes < 0  # no blank text: only missing cells are empty
    return (codes < 0) | (blank[np.maximum(codes, 0)] if len(blank) else True)


def _number_reasons(mark, name, values, not_number, missing, signed: bool = False, bounded: bool = True):
    mark(not_number, f"non-numeric {name}")
    mark(missing, f"missing {name}")
    mark(~np.isfinite(values), f"non-finite {name}")
    if bounded:
        mark(np.abs(values) > LARGEST, f"{name} beyond ±1e15")
    if not signed:
        mark(values < 0, f"negative {name}")


def _duplicates(rows: RawRows, dates: np.ndarray, reject, open_rows: np.ndarray) -> None:
    """Rows repeating the series and date of an earlier usable row: ``reject(index, reason)``."""
    usable = np.flatnonzero(open_rows)
    if not len(usable):
        return
    repeated, earlier = duplicate_rows([values.codes[usable] for values in rows.keys.values()], dates[usable],
                                       rows.line[usable])
    for index, line in zip(usable[repeated], earlier):
        reject(index, duplicate_reason(line))


def duplicate_rows(keys: list[np.ndarray], dates: np.ndarray, lines: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows (in line order) repeating the key and date of an earlier row: their indices, and that row's line."""
    frame = pd.DataFrame({f"k{i}": values for i, values in enumerate(keys)})
    frame["_date"] = dates.view(np.int64)
    repeated = frame.duplicated(keep="first").to_numpy()
    if not repeated.any():
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    first_line = pd.Series(lines).groupby([frame[c] for c in frame.columns], sort=False).transform("first")
    return np.flatnonzero(repeated), first_line.to_numpy()[repeated]


def duplicate_reason(line: int) -> str:
    return f"duplicate of line {line} (same series and date)"


def summary(reasons_of_rejected: list[str] | np.ndarray) -> str:
    """'412 rows rejected: 380 non-numeric volume, 32 negative price' (most common first)."""
    counts = Counter(str(r) if not str(r).startswith("duplicate of line") else "duplicate series and date"
                     for r in reasons_of_rejected)
    total = sum(counts.values())
    parts = ", ".join(f"{count:,} {reason}" for reason, count in counts.most_common())
    return f"{total:,} row{'s' if total != 1 else ''} rejected: {parts}"
