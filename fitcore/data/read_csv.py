"""CSV and TSV files (optionally gzip) as ``RawRows``: pyarrow's reader, or Python's csv line by line.

pyarrow's multi-threaded reader takes the file when every row is one physical line
(``textfile.rows_are_lines``), so row i is line i + 2.  A line with nothing, or white space only, on it is an
empty line in both readers (``validation.EMPTY_LINE`` in ``RawRows.broken``, no cells); a line of empty cells
(``,,,``, ``"",,,``) is a row, whose key is empty.  A cell that is not a number: the file is read by pyarrow
again with the numbers as text.  A line with the wrong number of fields in a file without a quote: pyarrow reads
the file's bytes without such lines, and each is the row the line-by-line reader makes of it (``_read_around``).
Any other file — a quoted line break, a wrong number of fields where a quote may join lines, a cell longer than
pyarrow's block — is read again with Python's csv module, which names every row by the physical line it starts on.
Both skip a byte-order mark, read gzip by its magic bytes, and refuse a quote the last line opens and never
closes (``textfile.check_last_line``: both would end the cell at the end of the file).
"""
from __future__ import annotations

import csv
import zlib
from pathlib import Path

import numpy as np
import pyarrow as pa

from ..errors import DataError
from .cells import (coerce_numbers, columns_of, csv_text_numbers, dates, give_back_arrow_memory, number_names,
                    raw_from_columns)
from .columns import Columns
from .key_codes import KeyCodes
from .textfile import (BLOCK, arrow_stream, check_last_line, check_quotes, compressed_trouble, empty_lines,
                       file_bytes, holds, line_bounds, open_text, rows_are_lines)


def read_csv_rows(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """Every data row's needed columns, unchecked (``RawRows``; no row: the caller says so)."""
    rows = _read_fast(path, columns, delimiter, header)
    return _read_slow(path, columns, delimiter, header) if rows is None else rows


def _read_fast(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """pyarrow's reader; None when the file needs the line-by-line reader.

    A cell that is not a number fails pyarrow's read of numbers: the file is read again with the number
    columns as text, converted block by block (``cells.csv_text_numbers``), instead of going line by line
    (2.1M rows with one such cell: 16.0 s, 1.28 GB → 7.7 s, 548 MB).

    A line with the wrong number of fields fails pyarrow's read too.  In a file without a quote every
    line is one row, so such lines are found from the bytes and read around (``_read_around``) rather
    than line by line (``pricefold fit``, 2.1M rows with one such line: 18.3 s, 997 MiB → 7.3 s, 414 MiB;
    with five: 16.3 s → 7.8 s; the clean file 6.3–6.9 s, 414–423 MiB).

    No Python callback is handed to pyarrow: a failed read can leave its worker threads finishing after
    the call returns, and a Python object they release then needs the interpreter — at exit, that
    aborted the process ("terminate called without an active exception").  pyarrow is given native
    streams only: the file's own, or a buffer Arrow allocated.
    """
    types = _types(columns)
    table, as_text, trouble = _arrow_table(path, lambda: arrow_stream(path), columns, delimiter, types)
    if table is None:
        return _read_around(path, columns, delimiter, header, types, as_text) if _wrong_width(trouble) else None
    n_rows = table.num_rows
    same, last = rows_are_lines(path, n_rows)
    if not same:
        return None
    check_last_line(path, n_rows + 1, len(header), delimiter, last)
    parts, table = columns_of(table, columns), None  # each column freed once converted
    rows = raw_from_columns(parts, columns, np.arange(2, n_rows + 2, dtype=np.int64),
                            number_cells=csv_text_numbers if as_text else None)
    return _with_empty_lines(rows, path)


def _with_empty_lines(rows, path: Path):
    """``rows`` (row i on line i + 2, each of the header's fields or none) with their empty lines said
    (``EMPTY_LINE`` in ``broken``).  pyarrow gives an empty line a row of empty cells, as it gives ``,,,`` and
    ``"",,,``: the lines of the rows whose keys and numbers are all missing are looked at in the file's bytes (read
    only when there is such a row).  (A line of white space only has one field: such a file is read around.)"""
    from .validation import EMPTY_LINE
    none = None
    for values in (*(codes.codes < 0 for codes in rows.keys.values()),
                   *(missing for _, _, missing in rows.numbers.values())):
        none = values if none is None else none & values
        if not none.any():
            return rows
    at = np.flatnonzero(none)
    rows.broken.update({int(i): EMPTY_LINE for i in at[empty_lines(path, rows.line[at])]})
    return rows


def _types(columns: Columns) -> dict:
    """The reader's type of each key and date column: dictionary-encoded by the reader's threads (codes and
    each block's distinct texts, no string per row; a date parsed once per distinct text)."""
    types = {name: pa.dictionary(pa.int32(), pa.string()) for name in columns.keys}
    if columns.date:
        types[columns.date] = pa.dictionary(pa.int32(), pa.string())
    return types


def _arrow_table(path: Path, source, columns: Columns, delimiter: str, types: dict, as_text: bool = False):
    """``(table, as_text, "")`` read from ``source()`` with the numbers as float64 or, when a cell is not a
    number (or ``as_text`` says one was met before), as text; ``(None, as_text, why)`` when pyarrow refuses."""
    table, trouble = None, "conversion error"
    if not as_text:
        table, trouble = _arrow_read(path, source, columns, delimiter,
                                     types | {name: pa.float64() for name in number_names(columns)})
    as_text = table is None and "conversion error" in trouble
    if as_text:
        table, trouble = _arrow_read(path, source, columns, delimiter,
                                     types | {name: pa.string() for name in number_names(columns)})
    return table, as_text, trouble


def _arrow_read(path: Path, source, columns: Columns, delimiter: str, types: dict):
    """``(table, "")``: the needed columns as ``types`` says; ``(None, why)`` when pyarrow refuses the file."""
    from pyarrow import csv as arrow_csv
    try:
        stream = source()  # closed after a whole read only: after a failure, workers may still read it
        table = arrow_csv.read_csv(
            stream, parse_options=arrow_csv.ParseOptions(delimiter=delimiter, ignore_empty_lines=False),
            convert_options=arrow_csv.ConvertOptions(include_columns=columns.needed, column_types=types,
                                                     strings_can_be_null=True, null_values=[""]))
        stream.close()
    except (pa.ArrowInvalid, UnicodeDecodeError) as exc:
        return None, str(exc)
    except (OSError, EOFError, zlib.error) as exc:
        raise DataError(f"cannot read the file ({compressed_trouble(exc)})", path=str(path)) from None
    return table, ""


def _wrong_width(trouble: str) -> bool:
    """Did pyarrow refuse a row for its number of fields ("CSV parse error: Expected 3 columns, got 2: …")?"""
    return trouble.startswith("CSV parse error: Expected ") and " columns, got " in trouble


def _read_around(path: Path, columns: Columns, delimiter: str, header: list[str], types: dict, as_text: bool):
    """pyarrow's reader on the file's bytes without its lines of the wrong number of fields; None when the
    file holds a quote (a line may then be part of a row) or the line-by-line reader is needed anyway.

    Each such line is a row as the line-by-line reader gives it: no cells, and the reason "expected N
    fields, found M" (white space only: ``EMPTY_LINE``) in ``RawRows.broken``.  An empty line stays in the
    bytes (pyarrow gives it a row of empty cells) and is said an empty line too.  Row i is still line i + 2.
    """
    if len(delimiter.encode()) != 1 or delimiter in '\r\n"':
        return None
    give_back_arrow_memory()  # what the refused read left
    try:
        data = file_bytes(path)
    except (OSError, EOFError, zlib.error, pa.ArrowException):
        return None  # the line-by-line reader names where it stops
    view = np.frombuffer(data, np.uint8)
    if holds(view, ord('"')):
        return None
    starts, ends = line_bounds(view)
    fields = _field_counts(view, starts, ord(delimiter))
    wrong = np.flatnonzero((fields != len(header)) & (ends > starts))  # an empty line is no field at all
    wrong = wrong[wrong > 0]  # lines; the header sets the width
    if not len(wrong):
        return None
    from .validation import EMPTY_LINE
    n_rows = len(starts) - 1
    broken = {int(i) - 1: EMPTY_LINE if is_blank(view[starts[i]:ends[i]].tobytes())
              else f"expected {len(header)} fields, found {int(fields[i])}" for i in wrong}
    broken.update({int(i) - 1: EMPTY_LINE for i in np.flatnonzero(ends[1:] == starts[1:]) + 1})  # read: no cells
    view, fields, ends = None, None, None
    data = _without_lines(data, starts, wrong)
    starts = None
    give_back_arrow_memory()  # a gzip file's text, copied without those lines
    table, as_text, _ = _arrow_table(path, lambda: pa.BufferReader(data), columns, delimiter, types, as_text)
    data = None
    give_back_arrow_memory()
    if table is None or table.num_rows != n_rows - len(wrong):
        return None
    read = np.ones(n_rows, bool)
    read[wrong - 1] = False
    parts, table = columns_of(table, columns), None
    line = np.arange(2, n_rows + 2, dtype=np.int64)
    rows = raw_from_columns(parts, columns, line[read], number_cells=csv_text_numbers if as_text else None)
    return _among_broken(rows, read, line, broken)


def _among_broken(rows, read: np.ndarray, line: np.ndarray, broken: dict):
    """``RawRows`` of every row (``line``: (N,) their lines): ``rows`` where ``read`` (N,) says so, and between
    them the ``broken`` rows without cells, as the line-by-line reader leaves a line it could not split
    (keys and numbers missing, no date)."""
    from .validation import RawRows
    numbers = {name: (_spread(values, read, np.nan), _spread(text, read, False), _spread(missing, read, True))
               for name, (values, text, missing) in rows.numbers.items()}
    date = None if rows.date is None else (_spread(rows.date[0], read, np.datetime64("NaT")),
                                           _spread(rows.date[1], read, False), _spread(rows.date[2], read, False))
    return RawRows(line=line, keys={name: _spread(values, read) for name, values in rows.keys.items()},
                   numbers=numbers, date=date, broken=broken)


def is_blank(line: bytes | str) -> bool:
    """Is ``line`` (as written: quotes are not white space) white space only?  Most CSV readers take such a line
    for an empty one, and so do both readers here: an empty line, not a line of the wrong number of fields."""
    return not line.strip()


def _field_counts(data: np.ndarray, starts: np.ndarray, delimiter: int) -> np.ndarray:
    """(L,) int64 fields of each line beginning at ``starts`` (its delimiters + 1), a block of lines at a time:
    each block's delimiters found, then counted between its line starts."""
    counts = np.empty(len(starts), np.int64)
    cuts = np.unique(np.r_[np.searchsorted(starts, np.arange(0, len(data), BLOCK)), len(starts)])
    for first, end in zip(cuts[:-1].tolist(), cuts[1:].tolist()):
        low = int(starts[first])
        high = int(starts[end]) if end < len(starts) else len(data)
        found = np.flatnonzero(data[low:high] == delimiter)
        before = np.searchsorted(found, np.append(starts[first:end] - low, high - low))  # delimiters before each
        counts[first:end] = np.diff(before)
    return counts + 1


def _without_lines(data, starts: np.ndarray, lines: np.ndarray):
    """The Arrow buffer ``data`` without its ``lines`` (sorted), each with its line end: moved up in place when
    ``data`` is writable (a file read), else copied into a buffer Arrow allocates (a gzip file's)."""
    size = data.size
    after = np.append(starts, size)
    keep_from, keep_to = np.r_[0, after[lines + 1]], np.r_[starts[lines], size]
    kept = int((keep_to - keep_from).sum())
    out = data if data.is_mutable else pa.allocate_buffer(kept)
    source, into = np.frombuffer(data, np.uint8), np.frombuffer(out, np.uint8)
    at = 0
    for low, high in zip(keep_from.tolist(), keep_to.tolist()):
        into[at:at + high - low] = source[low:high]  # in place (at <= low): numpy copies a 1-D slice forward
        at += high - low
    return out.slice(0, kept)


def _spread(part, read: np.ndarray, empty=None):
    """``part`` (one value per row read) over every row, ``empty`` on the others (a key: missing)."""
    if isinstance(part, KeyCodes):
        return KeyCodes(_spread(part.codes, read, -1), part.categories)
    if hasattr(part, "categories"):
        import pandas as pd
        return pd.Categorical.from_codes(_spread(part.codes, read, -1), categories=part.categories)
    out = np.full(len(read), empty, dtype=part.dtype)
    out[read] = part
    return out


def _read_slow(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """Python's csv module, line by line: exact line numbers for any file pyarrow refused.

    Text is decoded leniently so that bytes that are not UTF-8 in a column pricefold ignores do not
    matter; in a needed column they are an error naming the line and the column.
    """
    import pandas as pd

    from .validation import EMPTY_LINE, RawRows
    wanted = [header.index(name) for name in columns.needed]
    width = len(header)
    cells: list[list] = [[] for _ in wanted]
    lines, broken = [], {}
    end = 1
    try:
        with open_text(path, errors="surrogateescape") as handle:
            read = [""]  # the physical line read last: a record's text as written (its quotes kept)
            reader = csv.reader(_remembered(handle, read), delimiter=delimiter)
            next(reader, None)
            end = reader.line_num
            for record in reader:
                start, end = end + 1, reader.line_num
                lines.append(start)
                if len(record) != width:
                    if start == end and is_blank(read[0]):  # nothing, or white space only, on the line
                        broken[len(lines) - 1] = EMPTY_LINE
                    else:
                        if end > start:  # a quote that swallowed lines: no row can be trusted after it
                            check_quotes(path, start, end, len(record), width, delimiter)
                        broken[len(lines) - 1] = f"expected {width} fields, found {len(record)}"
                    record = []
                for store, index in zip(cells, wanted):
                    store.append(record[index] if record else None)
            last_broken = broken.get(len(lines) - 1, EMPTY_LINE) != EMPTY_LINE
            if lines and (end > lines[-1] or last_broken):  # the last row: a quote never closed?
                check_quotes(path, lines[-1], end, width, width, delimiter)
            elif lines and record:  # one line: its last field may hold the open quote (the line just read)
                check_last_line(path, lines[-1], width, delimiter, read[0])
    except csv.Error as exc:
        raise DataError(f"cannot split line {end + 1} into fields ({exc})", path=str(path)) from None
    except (OSError, EOFError, zlib.error) as exc:
        raise DataError(f"cannot read the file after line {end} ({compressed_trouble(exc)})",
                        path=str(path)) from None
    line = np.asarray(lines, dtype=np.int64)
    by_name = dict(zip(columns.needed, cells))
    for name, values in by_name.items():
        _check_utf8(path, name, values, line)
    keys = {name: pd.Categorical(by_name[name]) for name in columns.keys}
    numbers = {name: coerce_numbers(pd.Series(by_name[name], dtype=object)) for name in number_names(columns)}
    date = dates(pa.array(by_name[columns.date], pa.string())) if columns.date else None
    return RawRows(line=line, keys=keys, numbers=numbers, date=date, broken=broken)


def _remembered(handle, read: list):
    """The lines of ``handle``, each kept in ``read[0]`` as it is handed on."""
    for text in handle:
        read[0] = text
        yield text


def _check_utf8(path: Path, name: str, values: list, line: np.ndarray) -> None:
    """Undecodable bytes (kept as lone surrogates) in a needed column: an error naming the first line."""
    for i, value in enumerate(values):
        if value is not None and not value.isascii():
            try:
                value.encode("utf-8")
            except UnicodeEncodeError:
                raise DataError("expected UTF-8 text; found bytes that are not UTF-8", path=str(path),
                                line=int(line[i]), column=name) from None
