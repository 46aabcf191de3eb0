"""Arrow columns as the checked-later parts of ``RawRows``: key codes, numbers, dates.

Shared by every reader (CSV fast and line by line, Parquet, the Dask engine's pieces), so a cell means
the same whichever reader met it.
"""
from __future__ import annotations

from datetime import datetime, timezone

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from .columns import Columns
from .validation import FIRST_DAY, LAST_DAY, RawRows

# datetime64[ns] holds 1677-09-21 00:12:43 … 2262-04-11 23:47:16: the whole days inside, in microseconds.
_US_LO = int(np.datetime64(FIRST_DAY, "us").astype(np.int64))
_US_HI = int(np.datetime64("2262-04-12", "us").astype(np.int64)) - 1
SPELLED_NONFINITE = ["nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"]


def number_names(columns: Columns) -> list[str]:
    return list(dict.fromkeys(name for name in (columns.price, columns.volume, columns.weight, *columns.controls)
                              if name))


def raw_from_table(table: pa.Table, columns: Columns, line: np.ndarray):
    """``RawRows`` of an Arrow table holding (at least) the needed columns; ``line`` (N,) each row's line."""
    keys = {name: categorical(table.column(name)) for name in columns.keys}
    numbers = {}
    for name in number_names(columns):
        column = table.column(name)
        if pa.types.is_floating(column.type) or pa.types.is_integer(column.type):
            values = column.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)  # nulls become NaN
            missing = (pc.is_null(column).to_numpy(zero_copy_only=False) if column.null_count
                       else np.zeros(len(values), bool))
            numbers[name] = (values, np.zeros(len(values), bool), np.asarray(missing, dtype=bool))
        else:
            numbers[name] = coerce_numbers(column.to_pandas())
    date = dates(table.column(columns.date)) if columns.date else None
    return RawRows(line=line, keys=keys, numbers=numbers, date=date)


def categorical(column) -> pd.Categorical:
    """Key text as a Categorical: integer codes for grouping instead of millions of Python strings."""
    import pandas as pd  # imported here, not with the module: a fit reads its file while pandas loads
    if not pa.types.is_string(column.type) and not pa.types.is_large_string(column.type):
        column = pc.cast(column, pa.string())
    encoded = column.combine_chunks().dictionary_encode() if isinstance(column, pa.ChunkedArray) \
        else column.dictionary_encode()
    codes = encoded.indices.to_numpy(zero_copy_only=False)
    # int32 as Arrow gives them (pandas would narrow int64 codes to int32 again); NaN where null.
    if codes.dtype.kind == "f":
        codes = np.where(np.isnan(codes), -1, codes)
    codes = codes.astype(np.int32, copy=False)
    categories = pd.Index(encoded.dictionary.to_pylist(), dtype=object)
    if categories.has_duplicates or categories.hasnans:
        return pd.Categorical(np.asarray(categories, dtype=object)[np.maximum(codes, 0)], categories=None)
    return pd.Categorical.from_codes(codes, categories=categories)


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
    converted to UTC), or Arrow dates and timestamps.  ``outside``: a real date the ns type cannot hold."""
    if isinstance(column, pa.ChunkedArray):
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
