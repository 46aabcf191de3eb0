"""A Parquet results file read column by column, one row per series: what a list or an export needs,
without a Python record per candidate.

A results file holds one row per series × candidate: ``n_c`` rows a series, the candidates in the order of
the fit's lineup (``table.py`` writes them so; ``stored.py`` relies on it too).  ``series_columns`` reads
only the columns asked for, checks that order row by row (``check_candidate_rows``), and hands back a
``SeriesColumns``: each series' value of a per-series column (its first row), or of the row of a given
candidate.  The header and the presence of every column the readers use are ``read.read_header``'s
checks; a problem is one line naming the file.
"""
from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..arrays import integers, numbers, objects
from ..errors import DataError, first_line


def is_text(kind) -> bool:
    """Whether an Arrow type is text (or a dictionary of text)."""
    import pyarrow as pa
    if pa.types.is_dictionary(kind):
        kind = kind.value_type
    return pa.types.is_string(kind) or pa.types.is_large_string(kind)


def is_columnar(path: str | Path) -> bool:
    """Whether ``path`` names a Parquet results file or a results folder (the readers check the rest)."""
    from ..data.columns import is_parquet_name
    from .read import result_parts
    return result_parts(path) is not None or is_parquet_name(Path(path))


def candidate_names(header: dict) -> tuple[str, ...]:
    """The candidates of the fit a results header describes, in the order its rows hold them."""
    from ..fit.families import lineup_for
    from ..fit.settings import settings_from_dict
    return tuple(c.name for c in lineup_for(settings_from_dict(header["settings"])).candidates)


def check_candidate_rows(path: Path, column, names) -> int:
    """The number of series of a file whose ``candidate`` column (Arrow) is ``column``; a ``DataError``
    unless its rows are ``len(names)`` a series, the candidates ``names`` in order on every series."""
    n_c, rows = len(names), len(column)
    if rows % max(n_c, 1):
        raise DataError(f"expected {n_c} rows per series, found {rows} rows", path=str(path))
    found = _codes(column, names)
    bad = np.flatnonzero(found != np.tile(np.arange(n_c), rows // max(n_c, 1)))
    if bad.size:
        r = int(bad[0])
        text = objects(column.slice(r, n_c if r < n_c else 1))
        if r < n_c:  # the first series: what ``stored.py`` always said
            raise DataError(f"expected candidates {list(names)}, found {[str(v) for v in text]}", path=str(path))
        raise DataError(f"row {r + 1}: expected candidate {names[r % n_c]!r}, found {text[0]!r} "
                        f"({n_c} rows a series, in candidate order)", path=str(path))
    return rows // max(n_c, 1)


def _codes(column, names) -> np.ndarray:
    """Each row's place in ``names`` (-1 for another name or null), chunk by chunk through the dictionary."""
    import pyarrow as pa
    place = {name: i for i, name in enumerate(names)}
    out = []
    for chunk in getattr(column, "chunks", [column]):
        if pa.types.is_dictionary(chunk.type):
            words = objects(chunk.dictionary) if len(chunk.dictionary) else np.zeros(0, dtype=object)
            of = np.array([place.get(w, -1) for w in words.tolist()] + [-1], dtype=np.int64)
            index = numbers(chunk.indices)
            if chunk.null_count:
                index = np.where(np.isnan(index), len(words), index)
            out.append(of[index.astype(np.int64)])
        else:
            out.append(np.array([place.get(w, -1) for w in objects(chunk).tolist()], dtype=np.int64))
    return np.concatenate(out) if out else np.zeros(0, dtype=np.int64)


@dataclass(frozen=True, eq=False)
class SeriesColumns:
    """Some columns of one results file (a file, or one part of a results folder), every row as read.

    ``rows(c)``: the file rows (from 0) of candidate ``c`` of each series, or of the candidate given per
    series; ``column``, ``texts`` and ``values`` take a column at those rows (one value a series)."""

    path: Path
    key_names: tuple[str, ...]
    candidates: tuple[str, ...]
    table: object  # pyarrow.Table: the columns read, n_c rows a series

    @property
    def n_series(self) -> int:
        return self.table.num_rows // max(len(self.candidates), 1)

    def rows(self, candidate=0, series=None) -> np.ndarray:
        """(S,) the row of ``candidate`` (an index into ``candidates``, one for all or one a series) of each
        series in ``series`` (indices, by default all)."""
        series = np.arange(self.n_series) if series is None else np.asarray(series, dtype=np.int64)
        return series * len(self.candidates) + np.asarray(candidate, dtype=np.int64)

    def column(self, name: str, candidate=0, series=None):
        """The Arrow column ``name`` at ``rows(candidate, series)``, one array."""
        taken = self.table.column(name).take(integers(self.rows(candidate, series)))
        return taken.combine_chunks() if hasattr(taken, "combine_chunks") else taken

    def texts(self, name: str, candidate=0, series=None) -> np.ndarray:
        """A text column at those rows as an object array (None for null)."""
        return objects(self.column(name, candidate, series))

    def values(self, name: str, candidate=0, series=None) -> list:
        """A column at those rows as Python values, what ``to_pylist`` gives (text from Arrow's buffers)."""
        if is_text(self.table.schema.field(name).type):
            return self.texts(name, candidate, series).tolist()
        return self.column(name, candidate, series).to_pylist()

    def keys(self, series=None) -> list[dict]:
        """Each series' key (column → text) as the record reader gives it."""
        columns = [self.texts(name, 0, series).tolist() for name in self.key_names]
        return [dict(zip(self.key_names, values)) for values in zip(*columns)] if columns else []

    def matching(self, products=(), keys: dict | None = None) -> np.ndarray:
        """Indices of the series whose first key column is among ``products`` (when given: a list, or any container
        such as ``fitcore.text.EitherForm``) and whose key columns hold ``keys`` (column → value); a column these
        results do not have matches nothing; a value: a text, or a container such as ``EitherForm``."""
        keep = np.ones(self.n_series, dtype=bool)
        if any(name not in self.key_names for name in keys or {}):
            return np.zeros(0, dtype=np.int64)
        if products:
            keep &= self._among(self.key_names[0], set(products) if isinstance(products, (list, tuple)) else products)
        for name, value in (keys or {}).items():
            keep &= self.texts(name) == value if isinstance(value, str) else self._among(name, value)
        return np.flatnonzero(keep)

    def _among(self, name: str, wanted) -> np.ndarray:
        """Whether each series' ``name`` is in ``wanted`` (a set, or a container such as ``EitherForm``; not
        np.isin: its sorting path cannot order a null key beside text)."""
        return np.fromiter((value in wanted for value in self.texts(name).tolist()), bool, self.n_series)


def series_columns(path: Path, header: dict, names) -> SeriesColumns:
    """The columns ``names`` (besides the key columns and ``candidate``) of the results file ``path``,
    whose header (``read.read_header``, ``key_columns`` included) is ``header``."""
    key_names = tuple(header["key_columns"])
    wanted = list(dict.fromkeys([*key_names, "candidate", *names]))
    table = _read(path, lambda reader: reader.read(columns=wanted))
    candidates = candidate_names(header)
    check_candidate_rows(path, table.column("candidate"), candidates)
    return SeriesColumns(Path(path), key_names, candidates, table)


def cells_at(path: Path, rows: np.ndarray, names) -> object:
    """The columns ``names`` of the Parquet file ``path`` at its rows ``rows`` (from 0, ascending), as a
    pyarrow.Table in that order: only the row groups holding them read (a few series' cells of a large file)."""
    rows = np.asarray(rows, dtype=np.int64)

    def read(reader):
        meta = reader.metadata
        starts = np.cumsum([0, *(meta.row_group(g).num_rows for g in range(meta.num_row_groups))])
        group = np.searchsorted(starts, rows, side="right") - 1
        groups = np.unique(group)
        table = reader.read_row_groups(groups.tolist(), columns=list(names))
        before = np.cumsum([0, *(starts[groups + 1] - starts[groups])[:-1]])  # the read groups' first rows
        return table.take(integers(rows - starts[group] + before[np.searchsorted(groups, group)]))
    return _read(path, read)


def _read(path: Path, read):
    """``read(reader)`` of the Parquet file ``path`` (``pq.ParquetFile``, every page's checksum checked); a file
    that cannot be read is one line naming it."""
    import pyarrow.parquet as pq
    try:
        # not read_table: that imports pyarrow.dataset and pandas
        reader = pq.ParquetFile(path, page_checksum_verification=True)
        try:
            return read(reader)
        finally:
            reader.close()
    except OSError as exc:
        raise DataError(f"cannot read it ({exc.strerror or first_line(exc)})", path=str(path)) from None
    except Exception as exc:  # pyarrow raises several unrelated types for a bad file
        raise DataError(f"expected a pricefold results file ({first_line(exc)})", path=str(path)) from None


# -- a list of series (``pricefold show``) ------------------------------------------------------------

LISTED = ("n", "chosen", "score", "flags", "fingerprint")  # what a list shows of a series, besides its key


class SeriesList:
    """The series a list shows, in file order: ``records[i]`` holds what the record reader's record would of the
    key, n, chosen, score, flags, fingerprint, last date and backtest (where the file holds them); ``record(i)`` reads
    series ``i``'s whole record (``read.series_record``), for one series shown in full."""

    def __init__(self) -> None:
        self.records: list[dict] = []
        self._where: list[tuple[Path, np.ndarray, int]] = []  # per part: the file, its series listed, n_c

    def __len__(self) -> int:
        return len(self.records)

    def add(self, part: Path, series: np.ndarray, n_c: int, records: list[dict]) -> None:
        self.records.extend(records)
        self._where.append((part, series, n_c))

    def record(self, i: int) -> dict:
        from .read import series_record
        for part, series, n_c in self._where:
            if i < len(series):
                return series_record(part, int(series[i]), n_c)
            i -= len(series)
        raise IndexError(i)


def listed_series(path: str | Path, products=(), keys: dict | None = None, flag: str | None = None
                  ) -> tuple[dict, SeriesList]:
    """``(header, listed)``: the series of a Parquet results file or folder whose first key column is among
    ``products`` (when given), whose key columns hold ``keys`` and which carry the flag ``flag`` (when
    given), in file order.  Every series the product and key filters keep is checked as the record reader
    checks the fields read (the same one line for a damaged one); the candidates' own columns are not read."""
    from .read import read_header, result_parts
    path = Path(path)
    header = read_header(path)
    header.pop("key_columns", None)
    out = SeriesList()
    for part in result_parts(path) or [path]:
        _list_part(out, part, products, keys or {}, flag)
    return header, out


def _list_part(out: SeriesList, part: Path, products, keys: dict, flag: str | None) -> None:
    from .read import read_header
    meta = read_header(part)
    schema = _schema_names(part)
    backtest = [name for name in schema if name.startswith("backtest_")] if "backtest_status" in schema else []
    dated = ["last_date"] if "last_date" in schema else []  # what show --ledger judges newer data by
    columns = series_columns(part, meta, [*LISTED, *backtest, *dated])
    at = columns.matching(products, keys)
    n_c = len(columns.candidates)
    texts = columns.values("flags", 0, at) if is_text(columns.table.schema.field("flags").type) else [None] * len(at)
    parsed = {text: _parsed(text) for text in set(texts)}
    for s, text in zip(at.tolist(), texts):  # as the record reader: the first unreadable list, by row
        if parsed[text] is _UNREADABLE:
            raise DataError(f"row {s * n_c + 1}: 'flags' should be JSON text of a list of flags", path=str(part))
    fields = {name: columns.values(name, 0, at) for name in ("n", "chosen", "score", "fingerprint")}
    key_values = [columns.values(name, 0, at) for name in columns.key_names]
    flag_lists = [parsed[text] for text in texts]
    keys_of = [dict(zip(columns.key_names, values)) for values in zip(*key_values)]
    check_fields(part, columns, at, fields, key_values, keys_of,
                 (flag_lists, texts, {t: _flags_ok(v) for t, v in parsed.items()}))
    if flag:
        has = {text: flag in {f["code"] for f in value} for text, value in parsed.items()}
        keep = np.array([has[text] for text in texts], dtype=bool)
    else:
        keep = np.ones(len(at), dtype=bool)
    picked = np.flatnonzero(keep).tolist()
    records = [{"key": keys_of[i], "n": fields["n"][i], "chosen": fields["chosen"][i], "score": fields["score"][i],
                "flags": flag_lists[i], "fingerprint": fields["fingerprint"][i]} for i in picked]
    if dated:  # date32 as days since 1970, to "YYYY-MM-DD" column-wise (None where the series has no dates)
        import pyarrow as pa
        days = numbers(columns.column("last_date", 0, at[keep]).view(pa.int32()))
        said = np.datetime_as_string(np.where(np.isnan(days), 0, days).astype(np.int64).astype("datetime64[D]"))
        for record, day, text in zip(records, np.isnan(days).tolist(), said.tolist()):
            record["last_date"] = None if day else text
    if backtest:
        values = {name: columns.values(name, 0, at) for name in backtest}
        for i, record in zip(picked, records):
            record["backtest"] = None if values["backtest_status"][i] is None else \
                {name[len("backtest_"):]: values[name][i] for name in backtest}
    out.add(part, at[keep], n_c, records)


_UNREADABLE = object()


def _parsed(text):
    import json
    try:
        return json.loads(text)
    except (TypeError, json.JSONDecodeError):
        return _UNREADABLE


def _flags_ok(value) -> bool:
    """A list of flags as ``checks.check_series`` accepts it (code, severity, message)."""
    from .checks import SEVERITIES
    return isinstance(value, list) and all(
        isinstance(f, dict) and isinstance(f.get("code"), str) and f.get("severity") in SEVERITIES
        and isinstance(f.get("message"), str) for f in value)


def _schema_names(part: Path) -> list[str]:
    import pyarrow.parquet as pq
    return pq.read_schema(part).names  # read_header has read it: a readable file


def check_fields(part: Path, columns: SeriesColumns, at: np.ndarray, fields: dict, key_values: list,
                 keys_of: list, flags: tuple[list, list, dict] | None = None) -> None:
    """The record reader's checks (``checks.check_series``) of the fields read of the series ``at``:
    ``fields`` (any of n, chosen, score, fingerprint: a list of values each), the key columns' values and
    the keys made of them, ``flags`` (each series' parsed list, its text, and whether each text's list is
    well formed).  Screened column-wise; a doubtful series is checked as a record, so a problem is the one
    line the record reader gives."""
    from .checks import check_series
    names, size = set(columns.candidates), len(at)
    bad = np.zeros(size, dtype=bool)
    for values in key_values:
        bad |= np.fromiter((type(v) is not str for v in values), bool, size)
    if "n" in fields:
        bad |= np.fromiter((type(v) is not int or v < 0 for v in fields["n"]), bool, size)
    if "chosen" in fields:
        bad |= np.fromiter((v is not None and (type(v) is not str or v not in names) for v in fields["chosen"]),
                           bool, size)
    if "score" in fields:
        bad |= np.fromiter((v is not None and type(v) not in (int, float) for v in fields["score"]), bool, size)
    if "fingerprint" in fields:
        bad |= np.fromiter((type(v) is not str for v in fields["fingerprint"]), bool, size)
    if flags is not None:
        bad |= ~np.fromiter((flags[2][t] for t in flags[1]), bool, size)
    candidates = [{"name": name, "available": False} for name in columns.candidates]
    for i in np.flatnonzero(bad).tolist():
        record = {"key": keys_of[i], "n": 0, "price_range": [None, None], "candidates": candidates, "chosen": None,
                  "score": None, "flags": [] if flags is None else flags[0][i], "fingerprint": ""}
        record.update({name: values[i] for name, values in fields.items()})
        check_series(part, int(at[i]), record)  # the line the record reader gives, if it fails


def results_keys(path: str | Path) -> Iterator[dict]:
    """Every series' key of a results file or folder, in file order: a JSON file's records; a Parquet file's
    (or folder's, part by part) key columns only."""
    from .read import read_header, result_parts, results_in_parts
    if not is_columnar(path):
        for part in results_in_parts(path)[1]:
            yield from (record["key"] for record in part)
        return
    for part in result_parts(path) or [Path(path)]:
        yield from series_columns(part, read_header(part), ()).keys()
