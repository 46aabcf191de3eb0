"""Arrow columns as the checked-later parts of ``RawRows``: key codes, numbers, dates.

Shared by every reader (CSV fast and line by line, Parquet, the Dask engine's pieces), so a cell means
the same whichever reader met it.
"""
from __future__ import annotations

from collections import Counter
from datetime import datetime, timezone

import numpy as np
import pyarrow as pa

from ..arrays import numbers, objects
from ..errors import DataError, first_line
from .columns import Columns
from .key_codes import KeyCodes
from .validation import FIRST_DAY, RawRows

# datetime64[ns] holds 1677-09-21 00:12:43 … 2262-04-11 23:47:16: the whole days inside, in microseconds.
_US_LO = int(np.datetime64(FIRST_DAY, "us").astype(np.int64))
_US_HI = int(np.datetime64("2262-04-12", "us").astype(np.int64)) - 1
SPELLED_NONFINITE = ["nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"]


def number_names(columns: Columns) -> list[str]:
    return list(dict.fromkeys(name for name in (columns.price, columns.volume, columns.weight, *columns.controls)
                              if name))


def raw_from_table(table: pa.Table, columns: Columns, line: np.ndarray):
    """``RawRows`` of an Arrow table holding (at least) the needed columns; ``line`` (N,) each row's line."""
    return raw_from_columns(columns_of(table, columns), columns, line)


def columns_of(table: pa.Table, columns: Columns) -> dict:
    """The needed columns of ``table`` by name: the caller drops the table, so that each column's memory
    goes as soon as ``raw_from_columns`` has converted it."""
    return {name: table.column(name) for name in columns.needed}


def raw_from_columns(parts: dict, columns: Columns, line: np.ndarray, path=None, number_cells=None):
    """``RawRows`` of the needed Arrow columns by name.  Each column is taken out of ``parts`` at its last
    use and its memory handed back once converted, so at most one column is held twice at a time.
    A column Arrow cannot turn into text, numbers or dates (bytes that are not UTF-8, a list) is a
    ``DataError`` naming ``path`` and the column.  ``number_cells``: how a number column is read (default
    ``_number_cells``; the CSV reader's text columns: ``csv_text_numbers``)."""
    uses = Counter([*columns.keys, *number_names(columns), *([columns.date] if columns.date else [])])

    def convert(name, how):
        uses[name] -= 1
        try:
            out = how(parts[name] if uses[name] else parts.pop(name))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError) as exc:
            trouble = first_line(exc)
            raise DataError(f"expected UTF-8 text, numbers or dates; found cells Arrow cannot convert ({trouble})",
                            path=path and str(path), column=name) from None
        give_back_arrow_memory()
        return out
    keys = {name: convert(name, categorical) for name in columns.keys}
    for name in number_names(columns):
        _refuse_true_false(parts[name], name, name in columns.controls, path)
    numbers = {name: convert(name, number_cells or _number_cells) for name in number_names(columns)}
    date = convert(columns.date, dates) if columns.date else None
    return RawRows(line=line, keys=keys, numbers=numbers, date=date)


def _refuse_true_false(column, name: str, control: bool, path) -> None:
    """A Parquet column of true/false (pandas would make every true 1.0: a price of 1) is not numbers:
    ``DataError`` naming it and its type, as a CSV's 'true' is a non-numeric cell."""
    kind = column.type
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    if pa.types.is_boolean(kind):
        what = "a 0/1 control as 0 and 1" if control else "its values as numbers"
        raise DataError(f"expected numbers, found a column of true/false (type {column.type}); write {what}",
                        path=path and str(path), column=name)


def give_back_arrow_memory() -> None:
    """Hand the memory pyarrow has freed back to the system.  Its allocator keeps freed pages for its own
    next use, where numpy's arrays (the rows, the fit) cannot reuse them (7M rows with the keys read as
    text: 386 MiB held until released).  A few milliseconds."""
    pa.default_memory_pool().release_unused()


def _number_cells(column) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, not_a_number, missing) of an Arrow column of numbers or of text."""
    if not pa.types.is_floating(column.type) and not pa.types.is_integer(column.type):
        return coerce_numbers(column.to_pandas())
    values = float_values(column)  # nulls become NaN
    if column.null_count:
        import pyarrow.compute as pc
        missing = pc.is_null(column).to_numpy(zero_copy_only=False)
    else:
        missing = np.zeros(len(values), bool)
    return values, np.zeros(len(values), bool), np.asarray(missing, dtype=bool)


def csv_text_numbers(column) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, not_a_number, missing) of a CSV number column read as text because some cell is not a
    number: each block parsed as pyarrow's CSV reader parses numbers (ASCII blanks trimmed, empty as
    missing), and a block holding a cell that does not parse read as the line-by-line reader reads it
    (``coerce_numbers``) — so one bad cell costs one block's Python, not the whole file's."""
    import pyarrow.compute as pc
    values = np.empty(len(column), np.float64)
    not_a_number, missing = np.zeros(len(column), bool), np.zeros(len(column), bool)
    at = 0
    for chunk in (column.chunks if isinstance(column, pa.ChunkedArray) else [column]):
        end = at + len(chunk)
        try:
            parsed = pc.cast(pc.ascii_trim_whitespace(chunk), pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            values[at:end], not_a_number[at:end], missing[at:end] = coerce_numbers(chunk.to_pandas())
        else:
            values[at:end] = parsed.to_numpy(zero_copy_only=False)  # nulls become NaN
            if parsed.null_count:
                missing[at:end] = pc.is_null(parsed).to_numpy(zero_copy_only=False)
        at = end
    return values, not_a_number, missing


def float_values(column) -> np.ndarray:
    """(N,) float64 of an Arrow number column, NaN where null: one chunk without nulls is not copied, more
    chunks are copied once into one array (no Arrow concatenation first)."""
    chunks = column.chunks if isinstance(column, pa.ChunkedArray) else [column]
    if len(chunks) == 1:
        return _as_numpy(chunks[0]).astype(np.float64, copy=False)
    out = np.empty(len(column), np.float64)
    at = 0
    for chunk in chunks:
        out[at:at + len(chunk)] = _as_numpy(chunk)
        at += len(chunk)
    return out


def _as_numpy(array) -> np.ndarray:
    """An Arrow number array as numpy, NaN where null: integers and floats from their buffers (``to_numpy``
    imports pandas, 0.4 s, which triage's read of the observations behind its list would wait for)."""
    kind = array.type
    if pa.types.is_integer(kind) or pa.types.is_float32(kind) or pa.types.is_float64(kind):
        return numbers(array)
    return array.to_numpy(zero_copy_only=False)


def categorical(column) -> KeyCodes:
    """Key text as codes: integer codes for grouping instead of millions of Python strings.

    A column the reader already dictionary-encoded (pyarrow's CSV reader, Parquet's ``read_dictionary``:
    multi-threaded, in C++) is never decoded: its blocks' small dictionaries are encoded together once,
    and each block's codes mapped through them.  Any other column is encoded here, as text (a NaN in a
    column of numbers is a missing cell, code -1, never the text 'nan')."""
    if isinstance(column, pa.Array):
        column = pa.chunked_array([column])
    found = _dictionary_codes(column) if _is_text_dictionary(column.type) else None
    if found is None:  # plain values, or a dictionary holding a null (a Parquet file may)
        import pyarrow.compute as pc
        if pa.types.is_floating(column.type):  # NaN names no series: a missing cell, as a null is (not 'nan')
            column = pc.if_else(pc.is_nan(column), pa.scalar(None, column.type), column)
        if not pa.types.is_string(column.type) and not pa.types.is_large_string(column.type):
            column = pc.cast(column, pa.string())
        encoded = column.combine_chunks().dictionary_encode()
        found = encoded.dictionary, _into_codes(np.empty(len(encoded), np.int32), encoded.indices, None)
    distinct, codes = found
    return KeyCodes(codes, objects(distinct))


def _is_text_dictionary(kind: pa.DataType) -> bool:
    return pa.types.is_dictionary(kind) and (pa.types.is_string(kind.value_type)
                                             or pa.types.is_large_string(kind.value_type))


def _dictionary_codes(column: pa.ChunkedArray):
    """(distinct texts, (N,) int32 codes) of a dictionary-encoded text column, or None when a dictionary
    holds a null.  Dictionaries may repeat values, within and across blocks: the distinct texts are numbered
    by first appearance over the blocks' dictionaries one after the other (as Arrow's ``dictionary_encode``
    of them numbers them).  Arrow's own dictionary unifier does the numbering, in C++, on a table of the
    dictionaries alone (each block's dictionary indexed by 0, 1, …: the unified indices are then that block's
    mapping), never on the rows (``Table.unify_dictionaries``: neither pandas nor ``pyarrow.compute``; 7M rows,
    100k keys in 7 blocks: 0.17–0.20 s through a Python dict of the texts → 0.02–0.06 s)."""
    dictionaries = [chunk.dictionary for chunk in column.chunks]
    if any(dictionary.null_count for dictionary in dictionaries):
        return None
    if not dictionaries:
        return pa.nulls(0, column.type.value_type), np.empty(0, np.int32)
    steps = np.arange(max(len(dictionary) for dictionary in dictionaries), dtype=np.int32)
    positions = pa.Array.from_buffers(pa.int32(), len(steps), [None, pa.py_buffer(steps)])
    alone = pa.chunked_array([pa.DictionaryArray.from_arrays(positions.slice(0, len(dictionary)), dictionary)
                              for dictionary in dictionaries]
                             + [pa.DictionaryArray.from_arrays(positions.slice(0, 0), dictionaries[0][:0])])
    # (the empty block last: one block alone is left as it is, a text it repeats repeated)
    unified = pa.table({"texts": alone}).unify_dictionaries().column(0)
    mappings = [_as_numpy(chunk.indices).astype(np.int64) for chunk in unified.chunks]
    codes = np.empty(len(column), np.int32)
    at = 0
    for chunk, mapping in zip(column.chunks, mappings):
        _into_codes(codes[at:at + len(chunk)], chunk.indices, mapping)
        at += len(chunk)
    return unified.chunks[0].dictionary, codes


def _into_codes(out: np.ndarray, indices: pa.Array, mapping: np.ndarray | None) -> np.ndarray:
    """``out`` filled with ``mapping[indices]`` (``indices`` themselves when ``mapping`` is None), -1 where null."""
    valid = raw = None
    if indices.null_count:
        import pyarrow.compute as pc
        valid = pc.is_valid(indices).to_numpy(zero_copy_only=False)
        raw = pc.fill_null(indices, 0).to_numpy(zero_copy_only=False)
    else:
        raw = _as_numpy(indices)
    if mapping is None:
        out[:] = raw
    elif len(mapping):
        np.take(mapping, raw, out=out)
    else:  # every value null: nothing to map
        out[:] = -1
    if valid is not None:
        out[~valid] = -1
    return out


def coerce_numbers(raw: pd.Series) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, not_a_number, missing) of text cells: values NaN where empty or unreadable."""
    import pandas as pd
    text = raw.astype(object)
    values = pd.to_numeric(text, errors="coerce").to_numpy(np.float64)
    stripped = text.astype(str).str.strip()
    missing = text.isna().to_numpy() | (stripped == "").to_numpy()
    spelled = stripped.str.lower().isin(SPELLED_NONFINITE).to_numpy()
    return values, np.isnan(values) & ~missing & ~spelled, missing


def dates(column) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(datetime64[ns] with NaT, unreadable, outside) of a date column: ISO 8601 text (any UTC offsets are
    converted to UTC), or Arrow dates and timestamps.  ``outside``: a real date the ns type cannot hold.

    Dictionary-encoded text (as the readers give it) is parsed once per distinct text, then spread over
    the rows by their codes (7M rows of weekly dates: 0.87 s of parsing → a few milliseconds)."""
    import pyarrow.compute as pc
    if isinstance(column, pa.Array):
        column = pa.chunked_array([column])
    if _is_text_dictionary(column.type):
        found = _dictionary_codes(column)
        if found is not None:
            distinct, codes = found
            # one more entry, NaT / False / False, for the code -1 of a missing cell: index -1 is the last
            return tuple(np.append(part, sentinel)[codes] for part, sentinel in
                         zip(dates(distinct), (np.datetime64("NaT", "ns"), False, False)))
        column = pc.cast(column, pa.string())  # a dictionary holding a null: decoded
    column = column.combine_chunks()
    unreadable = np.zeros(len(column), bool)
    if pa.types.is_timestamp(column.type) or pa.types.is_date(column.type):
        if pa.types.is_timestamp(column.type) and column.type.tz is not None:
            column = pc.cast(column, pa.timestamp(column.type.unit, tz="UTC")).cast(pa.timestamp(column.type.unit))
        micros = pc.cast(column, pa.timestamp("us")).cast(pa.int64())
    else:
        text = column if pa.types.is_string(column.type) else pc.cast(column, pa.string())
        try:
            micros = pc.cast(text, pa.timestamp("us")).cast(pa.int64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            micros, unreadable = _parse_each(text)
    present = ~np.asarray(pc.is_null(micros).to_numpy(zero_copy_only=False), dtype=bool)
    values = np.asarray(pc.fill_null(micros, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
    outside = present & ((values < _US_LO) | (values > _US_HI))
    ns = np.where(present & ~outside, values, 0) * 1000
    out = ns.view("datetime64[ns]")
    out[~present | outside] = np.datetime64("NaT")
    return out, unreadable & ~present, outside


def _parse_each(text: pa.Array) -> tuple[pa.Array, np.ndarray]:
    """Microseconds since 1970 of each distinct text (``datetime.fromisoformat``), and which did not parse."""
    import pyarrow.compute as pc
    encoded = text.dictionary_encode()
    micros = [_micros(value) for value in encoded.dictionary.to_pylist()]
    bad_text = np.array([value is None for value in micros] + [False], dtype=bool)
    indices = encoded.indices.to_numpy(zero_copy_only=False)
    indices = np.where(np.isnan(indices), -1, indices).astype(np.int64) if indices.dtype.kind == "f" else indices
    blank = np.array([not str(v).strip() for v in encoded.dictionary.to_pylist()] + [True], dtype=bool)
    unreadable = bad_text[indices] & ~blank[indices]
    table = pa.array(micros + [None], pa.int64())
    return pc.take(table, pa.array(np.where(indices < 0, len(micros), indices))), unreadable


def _micros(value: str) -> int | None:
    try:
        moment = datetime.fromisoformat(value.strip())
    except ValueError:
        return None
    if moment.tzinfo is not None:
        moment = moment.astimezone(timezone.utc).replace(tzinfo=None)
    delta = moment - datetime(1970, 1, 1)
    return (delta.days * 86_400 + delta.seconds) * 1_000_000 + delta.microseconds
