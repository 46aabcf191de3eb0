"""CSV and TSV files (optionally gzip) as ``RawRows``: pyarrow's reader, or Python's csv line by line.

pyarrow's multi-threaded reader takes the file when every cell converts and every row is one physical
line (``textfile.rows_are_lines``), so row i is line i + 2.  Any other file — a cell that is not a
number, a line with the wrong number of fields, a quoted line break, a cell longer than pyarrow's block
— is read again with Python's csv module, which names every row by the physical line it starts on.
Both skip a byte-order mark and read gzip by its magic bytes.
"""
from __future__ import annotations

import csv
import zlib
from pathlib import Path

import numpy as np
import pyarrow as pa

from ..errors import DataError
from .cells import coerce_numbers, columns_of, csv_text_numbers, dates, number_names, raw_from_columns
from .columns import Columns
from .textfile import arrow_stream, check_quotes, compressed_trouble, open_text, rows_are_lines


def read_csv_rows(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """Every data row's needed columns, unchecked (``RawRows``)."""
    rows = _read_fast(path, columns, delimiter)
    if rows is None:
        rows = _read_slow(path, columns, delimiter, header)
    if rows.n_rows == 0:
        raise DataError("expected at least one observation, found only a header", path=str(path))
    return rows


def _read_fast(path: Path, columns: Columns, delimiter: str):
    """pyarrow's reader; None when the file needs the line-by-line reader.

    A cell that is not a number fails pyarrow's read of numbers: the file is read again with the number
    columns as text, converted block by block (``cells.csv_text_numbers``), instead of going line by line
    (2.1M rows with one such cell: 16.0 s, 1.28 GB → 7.7 s, 548 MB).

    No Python callback is handed to pyarrow: a failed read can leave its worker threads finishing after
    the call returns, and a Python object they release then needs the interpreter — at exit, that
    aborted the process ("terminate called without an active exception").  A row with the wrong number
    of fields simply fails the read, which sends the file to the line-by-line reader.
    """
    # keys (and dates) dictionary-encoded by the reader's threads: codes and each block's distinct texts,
    # no string per row
    types = {name: pa.dictionary(pa.int32(), pa.string()) for name in columns.keys}
    if columns.date:  # parsed once per distinct text
        types[columns.date] = pa.dictionary(pa.int32(), pa.string())
    table, trouble = _arrow_read(path, columns, delimiter,
                                 types | {name: pa.float64() for name in number_names(columns)})
    as_text = table is None and "conversion error" in trouble
    if as_text:
        table, _ = _arrow_read(path, columns, delimiter, types | {name: pa.string() for name in number_names(columns)})
    if table is None:
        return None
    n_rows = table.num_rows
    if not rows_are_lines(path, n_rows):
        return None
    parts, table = columns_of(table, columns), None  # each column freed once converted
    return raw_from_columns(parts, columns, np.arange(2, n_rows + 2, dtype=np.int64),
                            number_cells=csv_text_numbers if as_text else None)


def _arrow_read(path: Path, columns: Columns, delimiter: str, types: dict):
    """``(table, "")``: the needed columns as ``types`` says; ``(None, why)`` when pyarrow refuses the file."""
    from pyarrow import csv as arrow_csv
    try:
        stream = arrow_stream(path)  # closed after a whole read only: after a failure, workers may still read it
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


def _read_slow(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """Python's csv module, line by line: exact line numbers for any file pyarrow refused.

    Text is decoded leniently so that bytes that are not UTF-8 in a column pricefold ignores do not
    matter; in a needed column they are an error naming the line and the column.
    """
    import pandas as pd

    from .validation import RawRows
    wanted = [header.index(name) for name in columns.needed]
    width = len(header)
    cells: list[list] = [[] for _ in wanted]
    lines, broken = [], {}
    end = 1
    try:
        with open_text(path, errors="surrogateescape") as handle:
            reader = csv.reader(handle, delimiter=delimiter)
            next(reader, None)
            end = reader.line_num
            for record in reader:
                start, end = end + 1, reader.line_num
                lines.append(start)
                if record and len(record) != width:
                    if end > start:  # a quote that swallowed lines: no row can be trusted after it
                        check_quotes(path, start, end, len(record), width)
                    broken[len(lines) - 1] = f"expected {width} fields, found {len(record)}"
                    record = []
                for store, index in zip(cells, wanted):
                    store.append(record[index] if record else None)
            if lines and end > lines[-1]:  # the last row may hold a quote that never closed
                check_quotes(path, lines[-1], end, width, width)
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


def _check_utf8(path: Path, name: str, values: list, line: np.ndarray) -> None:
    """Undecodable bytes (kept as lone surrogates) in a needed column: an error naming the first line."""
    for i, value in enumerate(values):
        if value is not None and not value.isascii():
            try:
                value.encode("utf-8")
            except UnicodeEncodeError:
                raise DataError("expected UTF-8 text; found bytes that are not UTF-8", path=str(path),
                                line=int(line[i]), column=name) from None
