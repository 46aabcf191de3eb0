"""Parquet files and folders as ``RawRows``: only the needed columns are read; row numbers count from 1."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow as pa

from ..errors import DataError
from .cells import raw_from_table
from .columns import Columns


def parquet_names(path: Path) -> list[str]:
    """The column names of a Parquet file or folder (a folder's files must agree)."""
    import pyarrow.parquet as pq
    try:
        if path.is_file():
            return pq.read_schema(path).names
        dataset = pq.ParquetDataset(path)
        if not dataset.files:
            raise DataError("no Parquet files in this folder", path=str(path))
        return dataset.schema.names
    except (pa.ArrowInvalid, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None


def read_parquet_rows(path: Path, columns: Columns):
    import pyarrow.parquet as pq
    try:
        table = pq.read_table(path, columns=columns.needed)
    except (pa.ArrowInvalid, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None
    if table.num_rows == 0:
        raise DataError("expected at least one observation, found none", path=str(path))
    return raw_from_table(table, columns, np.arange(1, table.num_rows + 1, dtype=np.int64))


def first_line(exc: Exception) -> str:
    return str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
