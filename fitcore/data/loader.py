"""Reading observation files into a ``Dataset``, accounting for every row.

CSV and TSV (optionally gzipped; delimiter sniffed or given) are read with
pyarrow's multi-threaded reader, Parquet files and folders with
pyarrow.parquet; only the columns pricefold uses are read.  A file pyarrow
cannot parse cleanly — a cell that is not a number, a line with the wrong
number of fields, a quoted line break — is read again line by line with
Python's csv module, so that every bad row is named by its line.  Rows that
cannot be used are rejected with a reason (``validation``), never dropped
silently: rows read = rows kept + rows rejected.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from ..errors import DataError
from .columns import Columns, file_sha256
from .dataset import Dataset, from_columns

CSV_SUFFIXES = {".csv": ",", ".tsv": "\t", ".txt": None}


def file_kind(path: Path) -> tuple[str, str | None]:
    """('csv', delimiter or None to sniff) or ('parquet', None)."""
    if path.is_dir():
        return "parquet", None
    suffixes = [s.lower() for s in path.suffixes]
    if suffixes and suffixes[-1] == ".gz":
        suffixes = suffixes[:-1]
    last = suffixes[-1] if suffixes else ""
    if last in (".parquet", ".pq"):
        return "parquet", None
    if last in CSV_SUFFIXES:
        return "csv", CSV_SUFFIXES[last]
    raise DataError(f"expected a .csv, .tsv, .txt (optionally .gz) or .parquet file, got {path.name!r}", path=str(path))


@dataclass(frozen=True)
class Rejects:
    """Rows that could not be used: their lines and reasons, and where they came from."""

    path: Path
    kind: str
    delimiter: str | None
    lines: np.ndarray
    reasons: list

    def __len__(self) -> int:
        return len(self.lines)


def load(path: str | Path, columns: Columns = Columns(), *, sep: str | None = None) -> Dataset:
    """Read ``path`` and group its usable rows into series (see ``load_with_rejects``)."""
    return load_with_rejects(path, columns, sep=sep)[0]


def load_with_rejects(path: str | Path, columns: Columns = Columns(), *,
                      sep: str | None = None) -> tuple[Dataset, Rejects]:
    """The dataset of usable rows, and the rejected rows with their reasons.

    Raises ``DataError`` (one line: file, line, column, what was expected) when
    the file itself cannot be used, or when no row is usable.
    """
    from .validation import reasons

    path = Path(path)
    rows, kind, delimiter = read_rows(path, columns, sep)
    why, usable = reasons(rows, columns.price, columns.volume, columns.weight, columns.date,
                          controls=columns.controls)
    bad = np.flatnonzero(~usable)
    rejects = Rejects(path, kind, delimiter, rows.line[bad], why[bad].tolist())
    if len(bad) == rows.n_rows:
        from .validation import summary
        raise DataError(f"no usable rows ({summary(rejects.reasons)})", path=str(path))
    keep = np.flatnonzero(usable) if len(bad) else slice(None)  # a clean file is not copied
    keys = {name: values[keep] for name, values in rows.keys.items()}
    number = lambda name: rows.numbers[name][0][keep]  # noqa: E731
    source = {"path": str(path.resolve()), "sha256": file_sha256(path), "rows": rows.n_rows,
              "rejected": int(len(bad))}
    dataset = from_columns(keys, number(columns.price), number(columns.volume),
                           weight=number(columns.weight) if columns.weight else None,
                           date=rows.date[0][keep] if columns.date else None, line=rows.line[keep], source=source,
                           controls={name: number(name) for name in columns.controls})
    return dataset, rejects


def check_file(path: Path) -> None:
    """One clear error for a file that is missing, unreadable, empty or not text."""
    if not path.exists():
        raise DataError("file not found", path=str(path))
    if path.is_dir():
        return
    try:
        with _open_bytes(path) as handle:  # for gzip, what it holds
            head = handle.read(8192)
    except (OSError, EOFError) as exc:  # EOFError: a gzip file cut short
        raise DataError(f"cannot read the file ({getattr(exc, 'strerror', None) or exc})", path=str(path)) from None
    if not head:
        raise DataError("the file is empty; expected a header line and observations", path=str(path))
    if file_kind(path)[0] == "csv":
        if b"\x00" in head:
            raise DataError("expected UTF-8 text (CSV or TSV); this looks like a binary file", path=str(path))
        try:
            head.decode("utf-8")
        except UnicodeDecodeError as exc:
            if exc.start < len(head) - 4:  # not just a character cut at the sample's end
                raise DataError("expected UTF-8 text; found bytes that are not UTF-8 near the start",
                                path=str(path)) from None


def read_rows(path: Path, columns: Columns, sep: str | None = None):
    """``(RawRows, kind, delimiter)`` of ``path``: every data row's needed columns, unchecked."""
    check_file(path)
    kind, default_sep = file_kind(path)
    if kind == "parquet":
        return _read_parquet(path, columns), kind, None
    delimiter = sep or default_sep or _sniff(path)
    header = _csv_header(path, delimiter)
    _check_columns(path, header, columns)
    rows = _read_csv_fast(path, columns, delimiter)
    if rows is None:
        rows = _read_csv_slow(path, columns, delimiter, header)
    if rows.n_rows == 0:
        raise DataError("expected at least one observation, found only a header", path=str(path))
    return rows, kind, delimiter


def _csv_header(path: Path, delimiter: str) -> list[str]:
    import csv as stdcsv
    try:
        with _open_text(path) as handle:
            header = next(stdcsv.reader(handle, delimiter=delimiter), [])
    except (UnicodeDecodeError, OSError, stdcsv.Error) as exc:
        raise DataError(f"expected a text table with a header line ({_first_line(exc)})", path=str(path)) from None
    if not [name for name in header if name.strip()]:
        raise DataError("expected a header line naming the columns, found an empty first line", path=str(path), line=1)
    return header


def _number_names(columns: Columns) -> list[str]:
    return list(dict.fromkeys(name for name in (columns.price, columns.volume, columns.weight, *columns.controls)
                              if name))


def _read_csv_fast(path: Path, columns: Columns, delimiter: str):
    """pyarrow's reader; None when the file needs the line-by-line reader."""
    from pyarrow import csv
    trouble = []

    def on_invalid(row):
        trouble.append(row)
        return "skip"

    types = {name: pa.string() for name in columns.keys}
    types.update({name: pa.float64() for name in _number_names(columns)})
    if columns.date:
        types[columns.date] = pa.string()
    try:
        table = csv.read_csv(path, parse_options=csv.ParseOptions(delimiter=delimiter, ignore_empty_lines=False,
                                                                  invalid_row_handler=on_invalid),
                             convert_options=csv.ConvertOptions(include_columns=columns.needed, column_types=types,
                                                                strings_can_be_null=True, null_values=[""]))
    except (pa.ArrowInvalid, UnicodeDecodeError):
        return None
    if trouble:
        return None
    line = np.arange(2, table.num_rows + 2, dtype=np.int64)
    return _raw_from_table(table, columns, line)


def _raw_from_table(table: pa.Table, columns: Columns, line: np.ndarray):
    from .validation import RawRows
    keys = {name: _categorical(table.column(name)) for name in columns.keys}
    numbers = {}
    for name in _number_names(columns):
        column = table.column(name)
        if pa.types.is_floating(column.type) or pa.types.is_integer(column.type):
            values = column.to_numpy(zero_copy_only=False).astype(np.float64, copy=False)  # nulls become NaN
            missing = pc.is_null(column).to_numpy(zero_copy_only=False) if column.null_count else np.zeros(len(values), bool)
            numbers[name] = (values, np.zeros(len(values), bool), np.asarray(missing, dtype=bool))
        else:
            numbers[name] = _coerce_numbers(column.to_pandas())
    date = _dates(table.column(columns.date)) if columns.date else None
    return RawRows(line=line, keys=keys, numbers=numbers, date=date)


def _categorical(column) -> pd.Categorical:
    """Key text as a Categorical: integer codes for grouping instead of millions of Python strings."""
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


def _coerce_numbers(raw: pd.Series) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(values, not_a_number, missing) of text cells: values NaN where empty or unreadable."""
    text = raw.astype(object)
    values = pd.to_numeric(text, errors="coerce").to_numpy(np.float64)
    stripped = text.astype(str).str.strip()
    missing = text.isna().to_numpy() | (stripped == "").to_numpy()
    spelled = stripped.str.lower().isin(["nan", "inf", "-inf", "+inf", "infinity", "-infinity"]).to_numpy()
    return values, np.isnan(values) & ~missing & ~spelled, missing


def _dates(column) -> tuple[np.ndarray, np.ndarray]:
    """(datetime64[ns] with NaT, unreadable) of an ISO date or datetime column."""
    if pa.types.is_timestamp(column.type) or pa.types.is_date(column.type):
        return pc.cast(column, pa.timestamp("ns")).to_numpy(zero_copy_only=False), np.zeros(len(column), bool)
    try:
        values = pc.cast(column, pa.timestamp("ns")).to_numpy(zero_copy_only=False)
        return values, np.zeros(len(values), bool)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        pass
    text = column.to_pandas().astype(object)
    values = pd.to_datetime(text, format="ISO8601", errors="coerce").to_numpy("datetime64[ns]")
    present = text.notna().to_numpy() & (text.astype(str).str.strip() != "").to_numpy()
    return values, np.isnat(values) & present


def _is_gzip(path: Path) -> bool:
    with open(path, "rb") as handle:
        return handle.read(2) == b"\x1f\x8b"


def _open_bytes(path: Path):
    import gzip
    return gzip.open(path, "rb") if _is_gzip(path) else open(path, "rb")


def _open_text(path: Path):
    import gzip
    if _is_gzip(path):
        return gzip.open(path, "rt", encoding="utf-8", newline="")
    return open(path, encoding="utf-8", newline="")


def _read_csv_slow(path: Path, columns: Columns, delimiter: str, header: list[str]):
    """Python's csv module, line by line: exact line numbers for any file pyarrow refused."""
    import csv as stdcsv

    from .validation import RawRows
    wanted = [header.index(name) for name in columns.needed]
    cells: list[list] = [[] for _ in wanted]
    lines, broken = [], {}
    try:
        with _open_text(path) as handle:
            reader = stdcsv.reader(handle, delimiter=delimiter)
            next(reader, None)
            end = reader.line_num
            for record in reader:
                start, end = end + 1, reader.line_num
                lines.append(start)
                if record and len(record) != len(header):
                    broken[len(lines) - 1] = f"expected {len(header)} fields, found {len(record)}"
                    record = []
                for store, index in zip(cells, wanted):
                    store.append(record[index] if record else None)
    except UnicodeDecodeError:
        raise DataError(f"expected UTF-8 text; found bytes that are not UTF-8 after line {end}",
                        path=str(path)) from None
    except stdcsv.Error as exc:
        raise DataError(f"cannot split line {end + 1} into fields ({exc})", path=str(path)) from None
    by_name = dict(zip(columns.needed, cells))
    keys = {name: pd.Categorical(by_name[name]) for name in columns.keys}
    numbers = {name: _coerce_numbers(pd.Series(by_name[name], dtype=object)) for name in _number_names(columns)}
    date = _dates(pa.array(by_name[columns.date], pa.string())) if columns.date else None
    return RawRows(line=np.asarray(lines, dtype=np.int64), keys=keys, numbers=numbers, date=date, broken=broken)


def _read_parquet(path: Path, columns: Columns):
    import pyarrow.parquet as pq
    try:
        schema = pq.read_schema(path) if path.is_file() else pq.ParquetDataset(path).schema
        _check_columns(path, schema.names, columns)
        table = pq.read_table(path, columns=columns.needed)
    except (pa.ArrowInvalid, OSError) as exc:
        raise DataError(f"not a readable Parquet file ({_first_line(exc)})", path=str(path)) from None
    if table.num_rows == 0:
        raise DataError("expected at least one observation, found none", path=str(path))
    return _raw_from_table(table, columns, np.arange(1, table.num_rows + 1, dtype=np.int64))


def write_rejects(rejects: Rejects, out: Path) -> Path:
    """The rejected rows as CSV: the original columns, then ``line`` and ``reason`` (written atomically)."""
    import csv as stdcsv
    import io

    from ..results.write import _atomic_write
    wanted = dict(zip(rejects.lines.tolist(), rejects.reasons))
    buffer = io.StringIO()
    writer = stdcsv.writer(buffer, lineterminator="\n")
    if rejects.kind == "parquet":
        import pyarrow.parquet as pq
        table = pq.read_table(rejects.path)
        writer.writerow([*table.column_names, "line", "reason"])
        for line in wanted:
            writer.writerow([*table.slice(line - 1, 1).to_pylist()[0].values(), line, wanted[line]])
    else:
        with _open_text(rejects.path) as handle:
            reader = stdcsv.reader(handle, delimiter=rejects.delimiter)
            writer.writerow([*next(reader), "line", "reason"])
            end = reader.line_num
            for record in reader:
                start, end = end + 1, reader.line_num
                if start in wanted:
                    writer.writerow([*record, start, wanted[start]])
    _atomic_write(out, lambda handle: handle.write(buffer.getvalue().encode("utf-8")))
    return out


def _check_columns(path: Path, found: list[str], columns: Columns) -> None:
    for name in columns.needed:
        if name not in found:
            close = difflib.get_close_matches(name, found, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise DataError(f"expected a column {name!r}, found {', '.join(map(repr, found))}{hint}",
                            path=str(path), line=1, column=name)


def _sniff(path: Path) -> str:
    import csv as stdcsv
    try:
        with _open_text(path) as handle:
            sample = handle.read(64 * 1024)
        return stdcsv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except (stdcsv.Error, OSError, UnicodeDecodeError):
        return ","


def _first_line(exc: Exception) -> str:
    return str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
