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
        try:
            dataset = pq.ParquetDataset(path, partitioning=folder_partitioning(path))
        except (pa.ArrowException, OSError):  # a file that is not a part (its name said), or parts that disagree
            _check_parts(path, _part_files(path), None)
            raise
        if not dataset.files:
            raise DataError("no Parquet files in this folder", path=str(path))
        _check_parts(path, dataset.files, dataset.schema)
        return dataset.schema
    except (pa.ArrowException, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None


def folder_partitioning(folder: Path):
    """A partitioned folder's columns (``store=007/…``) read as the text of the folder names, exactly: inferred, ``007``,
    ``07`` and ``7`` were one number, 7 — three stores one series, two thirds of its rows rejected as duplicates
    (a trial).  Where no folder is named so, pyarrow's own "hive" (nothing to read from the names)."""
    import os

    import pyarrow.dataset as ds
    names = {}
    for _, folders, _ in os.walk(folder):
        for name in folders:
            if "=" in name:
                names.setdefault(name.split("=", 1)[0], None)
    if not names:
        return "hive"
    # as written, too: not URL-decoded (``North%20East`` and ``North East`` were one series) and no name read as
    # null (``__HIVE_DEFAULT_PARTITION__`` was, and Arrow failed on it in a traceback)
    return ds.HivePartitioning(pa.schema([(name, pa.string()) for name in names]), null_fallback="\x00",
                               segment_encoding="none")


def _part_files(folder: Path) -> list[str]:
    """The files of a data folder as a dataset reads them (not those named ``.…`` or ``_…``)."""
    import os
    return sorted(os.path.join(root, name) for root, folders, files in os.walk(folder) for name in files
                  if not name.startswith((".", "_")) and not any(step.startswith((".", "_"))
                                                                 for step in Path(root).relative_to(folder).parts))


def _check_parts(folder: Path, files: list[str], schema: pa.Schema | None) -> None:
    """Every file of a data folder is one of its Parquet parts, with the folder's columns: a note left beside them
    (``readme.txt``) failed the whole read in pyarrow's words, naming no file; a part missing a column (the folder
    takes the first part's) had every row rejected as missing that value, exit 0."""
    import pyarrow.parquet as pq
    names = schema.names if schema is not None else []
    for name in files:
        part = Path(name)
        try:
            own = pq.read_schema(part)
        except (pa.ArrowInvalid, OSError) as exc:
            raise DataError(f"holds {part.relative_to(folder)}, which is not a readable Parquet file "
                            f"({first_line(exc)}); a data folder holds only its Parquet parts", path=str(folder)) from None
        hive = {step.split("=", 1)[0] for step in part.relative_to(folder).parent.parts if "=" in step}
        both = sorted(hive & set(own.names))
        if both:  # Arrow: "Unable to merge: Field region has incompatible types"
            raise DataError(f"its part {part.relative_to(folder)} holds the column {both[0]!r} that its folder's name "
                            f"gives too ({both[0]}=…): keep it in the folder names or in the parts, not both",
                            path=str(folder))
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
            table = pq.read_table(path, columns=columns.needed, read_dictionary=texts, page_checksum_verification=True,
                                  partitioning=folder_partitioning(Path(path)))
    except (pa.ArrowException, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({first_line(exc)})", path=str(path)) from None
    n_rows = table.num_rows
    parts, table = columns_of(table, columns), None  # each column freed once converted
    return raw_from_columns(parts, columns, np.arange(1, n_rows + 1, dtype=np.int64), path)

