"""Rejected rows: which lines and why, the rejects file's name, and writing it.

The rejects file is ``<results name minus its last extension>.rejects.csv`` beside the results
(``fit.v1.json`` → ``fit.v1.rejects.csv``); a Dask results folder holds ``rejects.csv``.  Each rejected
row is written with its original cells, byte for byte (text that is not UTF-8 stays as it was, nothing
is neutralised), then two more fields: ``line`` and ``reason``.  The header is the input's, then
``line,reason``.  Every row has the header's number of fields, so a CSV reader finds ``line`` and
``reason`` under their names: a line with fewer fields than the header is padded with empty cells, one
with more has its extra fields joined to its last one with the delimiter, as they stood in the line.
"""
from __future__ import annotations

import csv
import io
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import numpy as np

from .textfile import open_text


@dataclass(frozen=True)
class Rejects:
    """Rows that could not be used: their lines and reasons, and where they came from; and the file's columns
    no role reads (``unread``)."""

    path: Path
    kind: str
    delimiter: str | None
    lines: np.ndarray
    reasons: list
    unread: tuple = ()

    def __len__(self) -> int:
        return len(self.lines)


def rejects_path(results: Path) -> Path:
    """Where the rejects of a run writing the results file ``results`` go: its name minus its last extension."""
    return results.with_name(results.stem + ".rejects.csv")


def first_cell(rejects: Rejects, column: str) -> str | None:
    """The text of ``column`` in the first rejected row of a CSV, as written there; None for Parquet, or a
    line without that field."""
    if rejects.kind == "parquet" or not len(rejects):
        return None
    wanted = int(rejects.lines[0])
    with _numbered_records(rejects) as (header, records):
        for start, record in records:
            if start == wanted:
                at = header.index(column) if column in header else -1
                return record[at] if 0 <= at < len(record) else None
    return None


def write_rejects(rejects: Rejects, handle: BinaryIO) -> None:
    """The rejected rows as CSV on the binary ``handle``: the original cells, then ``line`` and ``reason``."""
    text = io.TextIOWrapper(handle, encoding="utf-8", errors="surrogateescape", newline="", write_through=True)
    writer = csv.writer(text, lineterminator="\n")
    wanted = dict(zip(rejects.lines.tolist(), rejects.reasons))
    if rejects.kind == "parquet":
        _parquet_rows(rejects, wanted, writer)
    elif not _unquoted_rows(rejects, wanted, writer):
        with _numbered_records(rejects) as (header, records):
            writer.writerow([*header, "line", "reason"])
            for start, record in records:
                if start in wanted:
                    writer.writerow([*as_wide(record, len(header), rejects.delimiter), start, wanted[start]])
    text.flush()
    text.detach()  # the handle belongs to the caller


@contextmanager
def _numbered_records(rejects: Rejects):
    """``(header, records)`` of the CSV the rejects came from, read by Python's csv module: ``records`` yields
    ``(line, fields)``, ``line`` the physical line each row starts on (a quoted line break spans more)."""
    with open_text(rejects.path, errors="surrogateescape") as source:
        reader = csv.reader(source, delimiter=rejects.delimiter)
        header = next(reader, [])

        def records():
            end = reader.line_num
            for record in reader:
                start, end = end + 1, reader.line_num
                yield start, record
        yield header, records()


def _unquoted_rows(rejects: Rejects, wanted: dict, writer) -> bool:
    """The rejected lines cut straight out of the file's bytes, when it holds no quote and no NUL: then each
    physical line is one row, and its fields are its text split at the delimiter, as the csv module splits
    it (an empty line: no field).  No pass of the csv module over every line (2.1M rows: 1.5–2 s).  False
    when the file cannot be read so (the caller reads it line by line)."""
    from .textfile import file_bytes, holds, line_bounds
    delimiter = rejects.delimiter or ","
    if len(delimiter) != 1:
        return False
    try:
        data = np.frombuffer(file_bytes(rejects.path), np.uint8)
    except (OSError, EOFError, ValueError):
        return False
    if holds(data, ord('"')) or holds(data, 0):
        return False
    starts, ends = line_bounds(data)
    if not len(starts) or max(wanted, default=0) > len(starts):
        return False

    def fields(i: int, strip: str = "") -> list[str]:
        text = bytes(data[starts[i]:ends[i]]).decode("utf-8", "surrogateescape").removeprefix(strip)
        return text.split(delimiter) if text else []
    header = fields(0, "\ufeff")  # a byte-order mark is not the header's
    writer.writerow([*header, "line", "reason"])
    for line in sorted(wanted):
        writer.writerow([*as_wide(fields(line - 1), len(header), delimiter), line, wanted[line]])
    return True


def as_wide(record: list[str], width: int, delimiter: str) -> list[str]:
    """``record`` with ``width`` fields: padded with empty cells, or its fields from the last one on joined
    with the delimiter (the text they were in the line)."""
    if len(record) < width:
        return record + [""] * (width - len(record))
    if len(record) > width and width > 0:
        return [*record[:width - 1], delimiter.join(record[width - 1:])]
    return record


def _parquet_rows(rejects: Rejects, wanted: dict, writer) -> None:
    import pyarrow.parquet as pq
    table = pq.read_table(rejects.path)
    writer.writerow([*table.column_names, "line", "reason"])
    lines = np.fromiter(wanted, dtype=np.int64, count=len(wanted))
    rows = table.take(lines - 1).to_pylist()
    for line, row in zip(lines.tolist(), rows):
        writer.writerow([*("" if v is None else v for v in row.values()), line, wanted[line]])
