"""Reading observation files into a ``Dataset``.

CSV and TSV (optionally gzipped) are read with pyarrow's multi-threaded
reader, Parquet files and directories with pyarrow.parquet.  Only the
columns pricefold uses are read.
"""
from __future__ import annotations

import difflib
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from .dataset import Dataset, from_columns
from .errors import DataError

CSV_SUFFIXES = {".csv": ",", ".tsv": "\t", ".txt": None}


@dataclass(frozen=True)
class Columns:
    """Which input columns hold what."""

    product: str = "product"
    segments: tuple[str, ...] = ()
    price: str = "price"
    volume: str = "volume"
    date: str | None = None
    weight: str | None = None

    @property
    def keys(self) -> tuple[str, ...]:
        return (self.product, *self.segments)

    def as_dict(self) -> dict:
        return {"product": self.product, "segments": list(self.segments), "price": self.price,
                "volume": self.volume, "date": self.date, "weight": self.weight}

    @classmethod
    def from_dict(cls, values: dict) -> "Columns":
        return cls(product=values["product"], segments=tuple(values.get("segments", ())), price=values["price"],
                   volume=values["volume"], date=values.get("date"), weight=values.get("weight"))

    @property
    def needed(self) -> list[str]:
        extra = [c for c in (self.date, self.weight) if c]
        return list(dict.fromkeys([*self.keys, self.price, self.volume, *extra]))


def file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    if path.is_dir():
        for part in sorted(path.rglob("*.parquet")):
            digest.update(file_sha256(part).encode())
        return digest.hexdigest()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


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


def read_table(path: Path, columns: Columns, sep: str | None = None) -> pa.Table:
    """The needed columns of ``path`` as an Arrow table (strings for keys, float64 for numbers)."""
    if not path.exists():
        raise DataError("file not found", path=str(path))
    kind, default_sep = file_kind(path)
    if kind == "parquet":
        import pyarrow.parquet as pq
        try:
            schema = pq.read_schema(path) if path.is_file() else pq.ParquetDataset(path).schema
            _check_columns(path, schema.names, columns)
            return pq.read_table(path, columns=columns.needed)
        except (pa.ArrowInvalid, OSError) as exc:
            raise DataError(f"not a readable Parquet file ({_first_line(exc)})", path=str(path)) from None
    from pyarrow import csv
    delimiter = sep or default_sep or _sniff(path)
    try:
        header = csv.open_csv(path, read_options=csv.ReadOptions(block_size=1 << 16),
                              parse_options=csv.ParseOptions(delimiter=delimiter)).schema.names
    except (pa.ArrowInvalid, UnicodeDecodeError, OSError) as exc:
        raise DataError(f"expected a text table with a header row ({_first_line(exc)})", path=str(path)) from None
    _check_columns(path, header, columns)
    types = {name: pa.string() for name in columns.keys}
    types.update({columns.price: pa.float64(), columns.volume: pa.float64()})
    if columns.weight:
        types[columns.weight] = pa.float64()
    if columns.date:
        types[columns.date] = pa.string()
    parse = csv.ParseOptions(delimiter=delimiter)
    try:
        return csv.read_csv(path, parse_options=parse, convert_options=csv.ConvertOptions(
            include_columns=columns.needed, column_types=types, strings_can_be_null=True))
    except (pa.ArrowInvalid, UnicodeDecodeError) as exc:
        first_error = exc
    # Slow path, only on failure: read every column as text to say which cell is bad.
    try:
        text = csv.read_csv(path, parse_options=parse, convert_options=csv.ConvertOptions(
            include_columns=columns.needed, column_types={name: pa.string() for name in columns.needed}))
    except (pa.ArrowInvalid, UnicodeDecodeError) as exc:
        raise DataError(f"expected UTF-8 text with the same number of fields on every line ({_first_line(exc)})",
                        path=str(path)) from None
    for name, kind in types.items():
        if kind == pa.float64():
            raw = text.column(name).to_pandas()
            numbers = pd.to_numeric(raw, errors="coerce")
            bad = (numbers.isna() & raw.notna() & (raw.str.strip() != "")).to_numpy()
            if bad.any():
                row = int(np.argmax(bad))
                raise DataError(f"expected a number, got {raw.iloc[row]!r}", path=str(path), line=row + 2, column=name)
    raise DataError(_first_line(first_error), path=str(path))


def load(path: str | Path, columns: Columns = Columns(), *, sep: str | None = None) -> Dataset:
    """Read ``path`` and group its rows into series."""
    path = Path(path)
    table = read_table(path, columns, sep)
    if table.num_rows == 0:
        raise DataError("expected at least one observation, found only a header", path=str(path))
    keys = {name: _key_column(table, name, path) for name in columns.keys}
    price = _number_column(table, columns.price, path)
    volume = _number_column(table, columns.volume, path)
    weight = _number_column(table, columns.weight, path) if columns.weight else None
    date = _date_column(table, columns.date, path) if columns.date else None
    source = {"path": str(path.resolve()), "sha256": file_sha256(path), "rows": table.num_rows, "rejected": 0}
    return from_columns(keys, price, volume, weight=weight, date=date, source=source)


def _check_columns(path: Path, found: list[str], columns: Columns) -> None:
    for name in columns.needed:
        if name not in found:
            close = difflib.get_close_matches(name, found, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise DataError(f"expected a column {name!r}, found {', '.join(map(repr, found))}{hint}",
                            path=str(path), line=1, column=name)


def _key_column(table: pa.Table, name: str, path: Path) -> np.ndarray:
    column = table.column(name)
    bad = pc.or_(pc.is_null(column), pc.equal(pc.utf8_trim_whitespace(column), ""))
    _fail_first(bad, path, name, "expected a non-empty key")
    # Dictionary-encoded: grouping works on integer codes, not millions of Python strings.
    encoded = column.dictionary_encode().combine_chunks()
    return pd.Categorical.from_codes(encoded.indices.to_numpy(zero_copy_only=False),
                                     encoded.dictionary.to_pandas().astype(str))


def _number_column(table: pa.Table, name: str, path: Path) -> np.ndarray:
    values = table.column(name).to_numpy(zero_copy_only=False).astype(np.float64, copy=False)
    bad = ~np.isfinite(values) | (values < 0)
    _fail_first(bad, path, name, "expected a finite number ≥ 0")
    return values


def _date_column(table: pa.Table, name: str, path: Path) -> np.ndarray:
    column = table.column(name)
    try:
        return pc.cast(column, pa.timestamp("ns")).to_numpy(zero_copy_only=False)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        parsed = np.array([_parse_date(v) for v in column.to_pylist()], dtype="datetime64[ns]")
        _fail_first(np.isnat(parsed), path, name, "expected an ISO date such as 2026-03-31")
        return parsed


def _parse_date(value) -> np.datetime64:
    try:
        return np.datetime64(str(value).strip(), "ns")
    except ValueError:
        return np.datetime64("NaT")


def _fail_first(bad, path: Path, column: str, expected: str) -> None:
    mask = np.asarray(bad.to_numpy(zero_copy_only=False) if hasattr(bad, "to_numpy") else bad, dtype=bool)
    if mask.any():
        first = int(np.argmax(mask))
        raise DataError(f"{expected} ({int(mask.sum())} such rows in all)", path=str(path), line=first + 2, column=column)


def _sniff(path: Path) -> str:
    import csv as stdcsv
    import gzip
    opener = gzip.open if path.suffix.lower() == ".gz" else open
    try:
        with opener(path, "rt", encoding="utf-8", errors="replace") as handle:
            sample = handle.read(64 * 1024)
        return stdcsv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except (stdcsv.Error, OSError):
        return ","


def _first_line(exc: Exception) -> str:
    return str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__


