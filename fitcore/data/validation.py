"""Row-level validation: why each row cannot be used, or that it can (pure; no file access).

A row is rejected — never silently dropped — when the line is empty (nothing, or
white space only, on it: the readers say so, ``EMPTY_LINE`` in ``RawRows.broken``;
a line of empty cells such as ``,,,`` is a row with an empty key) or has the
wrong number of fields, a
key is empty, price or volume is missing, non-numeric, NaN or infinite, negative, or beyond ±1e15 (``LARGEST``; controls
too), the weight is missing, non-numeric
or negative, the date does not parse or lies outside the dates datetime64[ns]
holds (1677-09-22 to 2262-04-11), or the row repeats the series and date of an
earlier row.  The first reason that applies is the one reported.
"""
from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from .columns import LARGEST

FIRST_DAY, LAST_DAY = "1677-09-22", "2262-04-11"  # the whole days datetime64[ns] holds
EMPTY_LINE = "empty line"  # the readers' reason for a line with nothing (or white space only) on it


@dataclass
class RawRows:
    """The needed columns of every data row, as read, before any check.

    ``line``: (N,) line of each row in the file (header = line 1; Parquet: row number).
    ``keys``: name → (N,) ``KeyCodes`` (or ``pd.Categorical``) of the key's text (code -1 where the cell was
    empty).
    ``numbers``: name → ((N,) float64, NaN where missing or unreadable; (N,) bool "text that is not a
    number"; (N,) bool "empty cell").
    ``date``: ((N,) datetime64[ns] with NaT where missing, unreadable or outside, (N,) bool "text that is not a
    date", (N,) bool "a date outside what datetime64[ns] holds") or None.
    ``broken``: row index → reason, for rows whose line could not be split into the header's fields
    (``EMPTY_LINE``: nothing, or white space only, on it).
    ``unread``: the file's columns no role reads (``read_rows``' note of them).
    """

    line: np.ndarray
    keys: dict
    numbers: dict
    date: tuple | None = None
    broken: dict = field(default_factory=dict)
    unread: tuple = ()

    @property
    def n_rows(self) -> int:
        return len(self.line)

    def subset(self, at: np.ndarray) -> RawRows:
        """The rows at the sorted indices ``at``."""
        position = {int(index): i for i, index in enumerate(at)} if self.broken else {}
        return RawRows(line=self.line[at], keys={name: values[at] for name, values in self.keys.items()},
                       numbers={name: tuple(part[at] for part in parts) for name, parts in self.numbers.items()},
                       date=None if self.date is None else tuple(part[at] for part in self.date),
                       broken={position[index]: why for index, why in self.broken.items() if index in position})


def reasons(rows: RawRows, price: str, volume: str, weight: str | None,
            date: str | None, duplicates: bool = True, controls: tuple[str, ...] = ()) -> tuple[np.ndarray, np.ndarray]:
    """``(why, usable)``: (N,) the reason each row is rejected (None for a usable row), and (N,) bool usable.

    ``duplicates=False`` leaves the repeated series-and-date check to the caller (``duplicate_rows``), for
    rows read in pieces whose repeats may lie in another piece.  ``controls``: the control columns, each
    missing, non-numeric or non-finite cell a reason (controls may be negative).

    Whole columns are checked first, most by their least and greatest value alone; only the rows they
    leave in doubt go through the checks one by one, in order (a clean file makes no (N,) mask).
    """
    n = rows.n_rows
    checks = _checks(price, volume, weight, controls)
    blanks = {name: _blank(values.categories) for name, values in rows.keys.items()}
    doubtful = _doubtful(rows, blanks, checks, date)
    out = None  # the reasons, made at the first rejected row: a clean file needs no N-object array
    open_rows = np.ones(n, dtype=bool)  # no reason given yet
    if len(doubtful):
        why, usable = _first_reasons(rows.subset(doubtful), blanks, checks, date)
        open_rows[doubtful] = usable
        if not usable.all():
            out = np.full(n, None, dtype=object)
            out[doubtful] = why

    def reject(index, text):
        nonlocal out
        if out is None:
            out = np.full(n, None, dtype=object)
        out[index] = text
        open_rows[index] = False
    if date and rows.date is not None and duplicates:
        _duplicates(rows, rows.date[0], reject, open_rows)
    if out is None:  # every row usable: a read-only view of one None
        out = np.broadcast_to(np.array(None, dtype=object), (n,))
    return out, open_rows


def _checks(price, volume, weight, controls) -> list[tuple[str, bool, bool]]:
    """(column, signed, bounded) of each number check, in the order reasons are given."""
    # a weight scales sums instead of entering them: its overflow has its own reason
    return [*((name, False, name != weight) for name in (price, volume, weight) if name),
            *((name, True, True) for name in controls)]


def _first_reasons(rows: RawRows, blanks: dict, checks: list, date: str | None) -> tuple[np.ndarray, np.ndarray]:
    """``(why, usable)`` of ``rows``, checked one by one: the first reason that applies (no repeat check)."""
    n = rows.n_rows
    out = np.full(n, None, dtype=object)
    open_rows = np.ones(n, dtype=bool)  # no reason given yet

    def mark(mask, text):
        mask = np.asarray(mask, dtype=bool) & open_rows
        out[mask] = text
        open_rows[mask] = False

    for index, why in rows.broken.items():
        out[index] = why
        open_rows[index] = False
    for name, values in rows.keys.items():
        mark(_empty(values, blanks[name]), f"empty {name}")
    for name, signed, bounded in checks:
        _number_reasons(mark, name, *rows.numbers[name], signed=signed, bounded=bounded)
    if date and rows.date is not None:
        values, unreadable, outside = rows.date
        mark(unreadable, f"unparseable {date}")
        mark(outside, f"{date} outside {FIRST_DAY} to {LAST_DAY}")
        mark(np.isnat(values), f"missing {date}")
    return out, open_rows


def _doubtful(rows: RawRows, blanks: dict, checks: list, date: str | None) -> np.ndarray:
    """Sorted indices of every row that may have a reason (a repeated series and date aside)."""
    doubt = None

    def add(mask):
        nonlocal doubt
        doubt = mask if doubt is None else doubt | mask
    if rows.n_rows:
        for name, values in rows.keys.items():
            if values.codes.min() < 0 or blanks[name].any():
                add(_empty(values, blanks[name]))
        for name, signed, bounded in checks:
            values, not_number, missing = rows.numbers[name]
            low, high = -LARGEST if signed else 0.0, LARGEST if bounded else np.inf
            least, most = values.min(), values.max()  # NaN when any value is
            within = low <= least and most <= high and np.isfinite([least, most]).all()
            if not_number.any() or missing.any() or not within:
                add(not_number | missing | ~(np.isfinite(values) & (values >= low) & (values <= high)))
        if date and rows.date is not None:
            values, unreadable, outside = rows.date
            missing = np.isnat(values)
            if unreadable.any() or outside.any() or missing.any():
                add(unreadable | outside | missing)
    found = np.flatnonzero(doubt) if doubt is not None else np.zeros(0, np.int64)
    return np.union1d(found, np.fromiter(rows.broken, np.int64, len(rows.broken))) if rows.broken else found


BLANK_EACH = 1_000_000  # key texts checked for blanks one by one, without Arrow's regular expressions


def _blank(categories) -> np.ndarray:
    """(C,) bool: each category is empty or whitespace (``str.strip`` leaves nothing).  Up to ``BLANK_EACH``
    texts are looked at one by one (100,000 in 14 ms: less than importing ``pyarrow.compute``, 0.13 s, which
    triage's read of the observations behind its list would wait for); of more, those holding a letter or
    digit are found at once by Arrow and only the rest looked at one by one."""
    texts = np.asarray(categories, dtype=object)
    if len(texts) <= BLANK_EACH:
        return np.fromiter((str(text).strip() == "" for text in texts.tolist()), dtype=bool, count=len(texts))
    import pyarrow as pa
    import pyarrow.compute as pc
    try:
        letters = pc.match_substring_regex(pa.array(texts, pa.string()), "[0-9A-Za-z]")
        maybe = np.flatnonzero(~np.asarray(pc.fill_null(letters, False).to_numpy(zero_copy_only=False), dtype=bool))
    except (pa.ArrowException, TypeError, ValueError):  # not all text, or not encodable: all looked at
        maybe = np.arange(len(texts))
    out = np.zeros(len(texts), dtype=bool)
    out[maybe] = [str(texts[i]).strip() == "" for i in maybe]
    return out


def empty_keys(rows: RawRows) -> dict:
    """Key column name → (N,) bool: the cell is empty (missing, or white space only), as ``reasons`` reads it."""
    return {name: _empty(values, _blank(values.categories)) for name, values in rows.keys.items()}


def _empty(values, blank: np.ndarray) -> np.ndarray:
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
    if open_rows.all():  # the usual file: no row set aside yet, so no copy of every column to take them
        keys = [values.codes for values in rows.keys.values()]
        if none_repeated(keys, dates):
            return
        usable = np.arange(len(open_rows))
    else:
        usable = np.flatnonzero(open_rows)
        if not len(usable):
            return
        keys, dates = [values.codes[usable] for values in rows.keys.values()], dates[usable]
    repeated, earlier = duplicate_rows(keys, dates, rows.line[usable])
    for index, line in zip(usable[repeated], earlier):
        reject(index, duplicate_reason(line))


def duplicate_rows(keys: list[np.ndarray], dates: np.ndarray, lines: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows (in line order) repeating the key and date of an earlier row: their indices, and that row's line."""
    if none_repeated(keys, dates):
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    import pandas as pd
    frame = pd.DataFrame({f"k{i}": values for i, values in enumerate(keys)})
    frame["_date"] = dates.view(np.int64)
    repeated = frame.duplicated(keep="first").to_numpy()
    if not repeated.any():
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    first_line = pd.Series(lines).groupby([frame[c] for c in frame.columns], sort=False).transform("first")
    return np.flatnonzero(repeated), first_line.to_numpy()[repeated]


SEEN_CELLS = 1 << 26  # at least: a (series, date) table of this many bytes is cheap beside the rows' columns
_DAY = 86_400 * 10**9
_CHUNK = 1 << 20  # rows numbered at a time: small scratch arrays, used again, not fresh memory for every step


def none_repeated(keys: list[np.ndarray], dates: np.ndarray) -> bool:
    """Whether no two rows share a key and a date, found without hashing each row where it can be: each row's
    (series, date) numbered densely (the keys' codes in mixed radix, dates in whole days from the first) and marked
    in a table of one byte a pair; the rows are all distinct when as many cells are marked as there are rows.
    False where they repeat — or where the numbering does not fit (times within a day, a table over 16 bytes a
    row): ``duplicate_rows``' general way then says which.  7M rows of 100,000 weekly series: 2.0 s and 690 MiB
    at the peak by pandas' hashing → 0.1 s and 60 MiB."""
    n = len(dates)
    if n < 2:
        return True
    widths, size, room = [], 1, 16 * n + SEEN_CELLS
    for codes in keys:
        if codes.min(initial=0) < 0:
            return False
        widths.append(int(codes.max(initial=-1)) + 1)
        size *= widths[-1]
    day = dates.view(np.int64)
    first = np.int64(day.min())
    reach = int(day.max()) - int(first)
    if reach >= 1 << 62:  # (each row's distance from the first would overflow int64: NaT, or centuries apart)
        return False
    span = reach // _DAY + 1
    if size * span > room:
        return False
    seen = np.zeros(size * span, np.bool_)
    for at in range(0, n, _CHUNK):
        offset = day[at:at + _CHUNK] - first
        if (offset % _DAY).any():  # a time within a day: not numbered by days
            return False
        offset //= _DAY
        pair = np.zeros(len(offset), np.int64)
        for codes, width in zip(keys, widths):
            pair *= width
            pair += codes[at:at + _CHUNK]
        pair *= span
        pair += offset
        seen[pair] = True
    return int(np.count_nonzero(seen)) == n


def duplicate_reason(line: int) -> str:
    return f"duplicate of line {line} (same series and date)"


def summary(reasons_of_rejected: list[str] | np.ndarray) -> str:
    """'412 rows rejected: 380 non-numeric volume · 32 negative price' (most common first)."""
    counts = Counter(str(r) if not str(r).startswith("duplicate of line") else "duplicate series and date"
                     for r in reasons_of_rejected)
    total = sum(counts.values())
    parts = " · ".join(counted(reason, count)  # (" · ": a reason may hold a comma)
                       for reason, count in counts.most_common())
    return f"{total:,} row{'s' if total != 1 else ''} rejected: {parts}"


def counted(reason: str, count: int) -> str:
    """``count`` rows of one reason as the rejects line counts them: '3 non-numeric price', '2 empty lines',
    '1 line of 4 fields (5 expected)' (a reason that is a sentence made a noun)."""
    fields = _FIELDS.fullmatch(reason)
    if fields:
        return f"{count:,} line{'s' * (count != 1)} of {fields[2]} fields ({fields[1]} expected)"
    return f"{count:,} {reason}{'s' * (reason == EMPTY_LINE and count != 1)}"  # "3 empty lines"


def one_reason(reason: str) -> str:
    """A row's reason after "the first is": 'a line of 6 fields (5 expected)', the others as they are."""
    fields = _FIELDS.fullmatch(reason)
    return f"a line of {fields[2]} fields ({fields[1]} expected)" if fields else reason


_FIELDS = re.compile(r"expected (\d+) fields, found (\d+)")  # the text readers' reason (``read_csv``)
ISO_DATE = "an ISO date such as 2024-01-31"  # what a date cell is read as (``cells.dates``)


def is_date_reason(reason: str) -> bool:
    """Whether a row was rejected for its date (unparseable, or outside the range the date type holds)."""
    return reason.startswith("unparseable ") or f" outside {FIRST_DAY} to " in reason


def misread(reasons: list, read: int, first: str = "") -> str:
    """'; that is 9 of the 12 rows read: check the delimiter (--sep), the columns and the decimal mark' where
    more than half the rows read were rejected (a wrong delimiter, decimal commas), else ''; ``first``: where
    the first rejected row is and why, said after the count.  Mostly dates: their format is what to check; mostly
    duplicates of a series and date: the key columns (a trial left out --segment and read "check the delimiter")."""
    rejected = len(reasons)
    if 2 * rejected <= read:
        return ""
    most = Counter(map(str, reasons)).most_common(1)[0][0]
    check = ("the dates' format" if is_date_reason(most) else
             "the key columns (a --segment left out makes several series one, their dates repeated)"
             if most.startswith("duplicate of line") else "the delimiter (--sep), the columns and the decimal mark")
    return f"; that is {rejected:,} of the {read:,} rows read{first}: check {check}"
