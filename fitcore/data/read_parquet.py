"""Parquet files and folders as ``RawRows``: only the needed columns are read; row numbers count from 1."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow as pa

from ..errors import DataError, first_line
from .cells import columns_of, raw_from_columns
from .columns import Columns


def parquet_names(path: Path) -> list[str]:
    """The column names of a Parquet file or folder (a folder's files must agree)."""
    return parquet_schema(path).names


def parquet_schema(path: Path) -> pa.Schema:
    """The Arrow schema of a Parquet file or folder."""
    import pyarrow.parquet as pq
    try:
        if path.is_file():
            return pq.read_schema(path)
        dataset = pq.ParquetDataset(path)
        if not dataset.files:
            raise DataError("no Parquet files in this folder", path=str(path))
        _check_parts(path, dataset.files, dataset.schema)
        return dataset.schema
    except (pa.ArrowInvalid, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None


def _check_parts(folder: Path, files: list[str], schema: pa.Schema) -> None:
    """Every file of a data folder is one of its Parquet parts, with the folder's columns: a note left beside them
    (``readme.txt``) failed the whole read in pyarrow's words, naming no file; a part missing a column (the folder
    takes the first part's) had every row rejected as missing that value, exit 0."""
    import pyarrow.parquet as pq
    names = schema.names
    for name in files:
        part = Path(name)
        try:
            own = pq.read_schema(part)
        except (pa.ArrowInvalid, OSError) as exc:
            raise DataError(f"holds {part.relative_to(folder)}, which is not a readable Parquet file "
                            f"({first_line(exc)}); a data folder holds only its Parquet parts", path=str(folder)) from None
        hive = {step.split("=", 1)[0] for step in part.relative_to(folder).parent.parts if "=" in step}
        missing = [column for column in names if column not in own.names and column not in hive]  # (``region=East``:
        # a column held in the folder names of a partitioned data set)
        if missing:
            said = ", ".join(repr(column) for column in missing)
            raise DataError(f"its part {part.relative_to(folder)} has no column {said}, which the folder's other parts "
                            "have: every part needs the same columns", path=str(folder))


def read_parquet_rows(path: Path, columns: Columns, schema=None):
    """Every row's needed columns (``RawRows``; no row: the caller says so).  Text keys and dates are read
    dictionary-encoded: the reader decodes them straight into codes and a few distinct values, never millions
    of strings.
    ``schema``: ``parquet_schema(path)`` when the caller has it already."""
    import pyarrow.parquet as pq
    schema = parquet_schema(path) if schema is None else schema
    texts = [name for name in (*columns.keys, *([columns.date] if columns.date else []))
             if pa.types.is_string(schema.field(name).type) or pa.types.is_large_string(schema.field(name).type)]
    try:
        if Path(path).is_file():  # one file: read straight (``read_table`` first imports pyarrow's datasets and,
            # with them, pandas: 7M rows 0.5–1.1 s against 0.1–0.2 s, and the read then starts while pandas loads)
            with pq.ParquetFile(path, read_dictionary=texts, page_checksum_verification=True) as file:
                table = file.read(columns=columns.needed)
        else:
            table = pq.read_table(path, columns=columns.needed, read_dictionary=texts, page_checksum_verification=True)
    except (pa.ArrowInvalid, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None
    n_rows = table.num_rows
    parts, table = columns_of(table, columns), None  # each column freed once converted
    return raw_from_columns(parts, columns, np.arange(1, n_rows + 1, dtype=np.int64), path)

