"""The engine's input: every series' rows as contiguous float64 arrays."""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .key_codes import KeyCodes

FINGERPRINT_ROWS = 1 << 19  # rows stacked at a time for the fingerprints: a few MiB


def _readonly(array: np.ndarray) -> np.ndarray:
    array.flags.writeable = False
    return array


@dataclass(frozen=True, eq=False)
class Dataset:
    """Observations grouped by series.

    Rows of series ``s`` are ``offsets[s]:offsets[s + 1]``, in the order the
    input file gave them.  ``S`` series, ``N`` rows in all.

    - ``key_names``: the key columns (product first, then segments).
    - ``keys``: column name → (S,) array of strings.
    - ``offsets``: (S + 1,) int64.
    - ``price``, ``volume``: (N,) float64.
    - ``weight``: (N,) float64 or None (every row weighs 1).
    - ``date``: (N,) datetime64[ns] or None.
    - ``line``: (N,) int64, the row's line in the input file (header = line 1).
    - ``source``: where the rows came from (path, sha256, rows read, rows rejected).
    - ``controls``: column name → (N,) float64, the control columns (none by default);
      ``control_binary``: name → whether the column holds only 0 and 1 in the whole input
      (found from these rows where not given: a partition of a larger input is told).
    """

    key_names: tuple[str, ...]
    keys: dict[str, np.ndarray]
    offsets: np.ndarray
    price: np.ndarray
    volume: np.ndarray
    weight: np.ndarray | None = None
    date: np.ndarray | None = None
    line: np.ndarray | None = None
    source: dict = field(default_factory=dict)
    controls: dict = field(default_factory=dict)
    control_binary: dict = field(default_factory=dict)

    @property
    def n_series(self) -> int:
        return len(self.offsets) - 1

    @property
    def n_rows(self) -> int:
        return len(self.price)

    @cached_property
    def counts(self) -> np.ndarray:
        """(S,) observations per series."""
        return _readonly(np.diff(self.offsets))

    def key_of(self, s: int) -> dict[str, str]:
        return {name: str(self.keys[name][s]) for name in self.key_names}

    def fingerprint_of(self, s: int) -> str:
        return self.fingerprints[s]

    @cached_property
    def key_hash(self) -> np.ndarray:
        """(S,) uint64 hash of each series' key, the same on every machine.

        Seeds each series' fold shuffle, so fold assignment depends on the
        series itself and never on which other series share the file.
        """
        return _readonly(hash_keys({name: self.keys[name] for name in self.key_names}))

    @cached_property
    def fingerprints(self) -> list[str]:
        """SHA-256 of each series' rows as hex text (``fingerprint_texts``, as a list)."""
        return self.fingerprint_texts.to_pylist()

    @cached_property
    def fingerprint_texts(self):
        """(S,) Arrow text: the SHA-256 of each series' rows (price, volume, and weight, date and controls where
        given: ``fingerprint_columns``) in hex (``series_digests``), the rows in date order where they have dates
        (``date_order``: the same rows in another order are the same data); the hex text is made for all series at
        once in numpy, never a string a series (``fingerprints`` makes the strings when asked)."""
        return hex_texts(series_digests(self.fingerprint_columns, self.offsets, order=self.date_order))

    @cached_property
    def date_order(self) -> np.ndarray | None:
        """(N,) the rows in date order within each series (a date appears once in a series: repeats are rejected),
        or None where that is the rows' own order (a file kept in date order: one pass) or there are no dates."""
        if self.date is None or self.n_rows < 2:
            return None
        days = self.date.view(np.int64)
        back = days[1:] < days[:-1]
        back[self.offsets[1:-1][self.offsets[1:-1] > 0] - 1] = False  # a series' first row follows another's
        if not back.any():
            return None
        series = np.repeat(np.arange(self.n_series), self.counts)
        return _readonly(np.lexsort((days, series)))

    @property
    def fingerprint_columns(self) -> list[np.ndarray]:
        """The columns a series' fingerprint hashes, in order: price, volume, weight, date (as int64), controls."""
        columns = [self.price, self.volume]
        if self.weight is not None:
            columns.append(self.weight)
        if self.date is not None:
            columns.append(self.date.view(np.int64))
        columns.extend(self.controls.values())
        return columns


def series_digests(columns: list[np.ndarray], offsets: np.ndarray, keep: np.ndarray | None = None,
                   order: np.ndarray | None = None) -> np.ndarray:
    """(S, 32) uint8: the SHA-256 of each series' rows — the bytes of its rows of ``np.column_stack(columns)``
    (series by ``offsets``; in ``order`` (N,), a permutation within each series, where given), only the rows
    ``keep`` (N,) marks where given (a series keeping none: the digest of no bytes).  Stacked a block of series
    at a time (a whole 7M-row table was 110 MiB more at the results' peak); one ``hashlib`` call a series gives
    its 32 bytes."""
    n_series = len(offsets) - 1
    digests = bytearray(32 * n_series)
    sha256 = hashlib.sha256
    cuts = series_cuts(offsets, FINGERPRINT_ROWS)
    for first, end in zip(cuts[:-1], cuts[1:]):
        start, stop = int(offsets[first]), int(offsets[end])
        rows = slice(start, stop) if order is None else order[start:stop]
        table = np.column_stack([column[rows] for column in columns])
        bounds = offsets[first:end + 1] - start
        if keep is not None:  # the kept rows before each series' first row bound it in the kept table
            kept = keep[rows]
            table = table[kept]
            bounds = np.concatenate(([0], np.cumsum(kept)))[bounds]
        table = np.ascontiguousarray(table).view(np.uint8)
        width = table.shape[1]
        flat = memoryview(table.reshape(-1))  # a memoryview's slice costs half an ndarray's
        bounds = bounds * width
        digests[32 * first:32 * end] = b"".join(
            [sha256(flat[lo:hi]).digest() for lo, hi in zip(bounds[:-1].tolist(), bounds[1:].tolist())])
    return np.frombuffer(bytes(digests), np.uint8).reshape(n_series, 32)


def hex_texts(digests: np.ndarray) -> "pa.Array":
    """(S,) Arrow text of (S, B) bytes as lower-case hex, as ``hashlib``'s ``hexdigest`` writes them."""
    import pyarrow as pa
    n, width = digests.shape
    digits = np.frombuffer(b"0123456789abcdef", np.uint8)
    text = np.empty((n, 2 * width), np.uint8)
    text[:, 0::2] = digits[digests >> 4]
    text[:, 1::2] = digits[digests & 15]
    offsets = np.arange(0, 2 * width * n + 1, 2 * width, dtype=np.int32)
    return pa.Array.from_buffers(pa.string(), n, [None, pa.py_buffer(offsets), pa.py_buffer(text)])


def series_cuts(offsets: np.ndarray, rows: int) -> list[int]:
    """Where to cut the series into runs of about ``rows`` rows (whole series, a longer one alone):
    ``[0, …, S]``, each run ``cuts[i]:cuts[i + 1]``."""
    n_series = len(offsets) - 1
    if n_series == 0:
        return [0]
    marks = np.searchsorted(offsets, np.arange(rows, offsets[-1], rows), side="left")
    return sorted({0, n_series, *np.clip(marks, 1, n_series).tolist()})


def from_columns(keys: dict[str, np.ndarray], price, volume, *, weight=None, date=None,
                 line=None, source: dict | None = None, controls: dict | None = None,
                 control_binary: dict | None = None) -> Dataset:
    """Group rows into series by their key columns (first appearance order).

    Rows of one series keep their input order; rows need not arrive grouped.
    ``controls``: name → (N,) values of each control column; ``control_binary``: name → 0/1 or not
    over the whole input (default: found from these rows).
    """
    key_names = tuple(keys)
    codes = _series_codes([keys[name] for name in key_names])
    n = len(codes)
    if n and np.all(codes[1:] >= codes[:-1]):
        order = None
    else:
        order, codes = _grouped(codes)
    first = np.flatnonzero(np.concatenate(([True], codes[1:] != codes[:-1]))) if n else np.zeros(0, np.int64)
    offsets = np.append(first, n).astype(np.int64)
    take = (lambda a: None if a is None else np.ascontiguousarray(np.asarray(a) if order is None else np.asarray(a)[order]))
    rows_of_first = first if order is None else order[first]
    key_values = {name: _strings(keys[name], rows_of_first) for name in key_names}
    price = take(np.asarray(price, dtype=np.float64))
    volume = take(np.asarray(volume, dtype=np.float64))
    held = {name: _readonly(take(np.asarray(values, dtype=np.float64))) for name, values in (controls or {}).items()}
    binary = {name: bool((control_binary or {}).get(name, np.all((values == 0) | (values == 1))))
              for name, values in held.items()}
    return Dataset(
        key_names, key_values, _readonly(offsets), _readonly(price), _readonly(volume),
        None if weight is None else _readonly(take(np.asarray(weight, dtype=np.float64))),
        None if date is None else _readonly(take(np.asarray(date, dtype="datetime64[ns]"))),
        _readonly(take(np.arange(2, n + 2, dtype=np.int64) if line is None else np.asarray(line, np.int64))),
        dict(source or {}), held, binary)


def _grouped(codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(order, codes[order])`` with ``order = np.argsort(codes, kind="stable")``: rows grouped by series,
    each series' rows in input order.  Sorted as one int64 key, code × N + row, whose values are all
    distinct, so any sort keeps input order within a code: numpy's vectorised sort of int64 takes
    a sixth of the time of its stable argsort (7M rows of 100,000 interleaved series: 0.12 s vs 0.75 s)."""
    n = len(codes)
    if not n or int(codes.max()) + 1 > (np.iinfo(np.int64).max - n) // n or int(codes.min()) < -1:
        order = np.argsort(codes, kind="stable")
        return order, codes[order]
    key = codes * n  # codes are -1 (a missing key) or more
    key += np.arange(n, dtype=np.int64)
    key.sort()
    order = key % n
    np.floor_divide(key, n, out=key)
    return order, key


def _strings(column, rows: np.ndarray) -> np.ndarray:
    """(len(rows),) object array of the key column's values at ``rows``, as text."""
    if isinstance(column, KeyCodes):  # the readers' keys: their texts (str, each once), taken by code
        return column.categories[column.codes[rows]]
    import pandas as pd
    if isinstance(column, pd.Categorical):
        return np.asarray(column.categories.astype(str), dtype=object)[column.codes[rows]]
    return np.array([str(v) for v in np.asarray(column, dtype=object)[rows]], dtype=object)


def _series_codes(columns: list[np.ndarray]) -> np.ndarray:
    """One int64 code per row, equal for rows of one series, numbered by first appearance."""
    if len(columns) == 1 and isinstance(columns[0], KeyCodes):
        if in_first_appearance_order(columns[0].codes):  # as the readers' dictionaries usually number them: as
            return np.asarray(columns[0].codes, dtype=np.int64)  # they are (without importing pandas: triage
            # reads the data behind its list)
    import pandas as pd
    columns = [column.categorical() if isinstance(column, KeyCodes) else column for column in columns]
    if len(columns) == 1 and isinstance(columns[0], pd.Categorical):
        codes = np.asarray(columns[0].codes, dtype=np.int64)
        if in_first_appearance_order(codes):  # as the readers' dictionaries usually number them: as they are
            return codes
    codes, _ = pd.factorize(columns[0], sort=False)
    for column in columns[1:]:
        column_codes, uniques = pd.factorize(column, sort=False)
        # Re-number after each column so the combined code never overflows.
        codes, _ = pd.factorize(codes.astype(np.int64, copy=False) * len(uniques) + column_codes, sort=False)
    return codes.astype(np.int64, copy=False)


def in_first_appearance_order(codes: np.ndarray) -> bool:
    """Whether ``codes`` (integers) number their values by first appearance — 0 first, then
    each value not seen before one more than the largest before it — as ``pandas.factorize`` would number
    them (7M rows: 0.03 s against factorize's 0.27 s).  Rows grouped by series (each code the one before or
    one more, the usual file) are found in one difference of the codes as given (int32 from the readers:
    7M rows 0.03 → 0.006 s)."""
    if not len(codes) or codes[0] != 0:
        return False
    steps = np.diff(codes)
    if (steps.view(steps.dtype.str.replace("i", "u")) <= 1).all():  # 0 or 1, as unsigned: never below 0
        return True
    codes = np.asarray(codes, dtype=np.int64)
    if codes.min() < 0:
        return False
    most = np.maximum.accumulate(codes)
    return bool(np.all(codes[1:] <= most[:-1] + 1))


def hash_keys(keys: dict[str, np.ndarray]) -> np.ndarray:
    """(N,) uint64 hash of each row's key text (one value per row of the key columns): pandas'
    ``hash_pandas_object`` of the key columns as text, without an index.  Up to ``FEW_ROWS`` rows (a fit's
    series, the few series triage fits first behind its list) the same numbers are computed with numpy
    (``key_hashes``: 100k keys ≈ 0.05 s), without importing pandas (0.4–0.8 s of a fit's start); more rows
    (a key a row: the partitions of ``--engine dask``) go to pandas, which hashes each distinct text once."""
    texts = {name: np.asarray(values).astype(str) for name, values in keys.items()}
    if len(next(iter(texts.values()), ())) <= FEW_ROWS:
        from .key_hashes import pandas_hashes
        return pandas_hashes(list(texts.values()))
    import pandas as pd
    frame = pd.DataFrame(texts)
    return pd.util.hash_pandas_object(frame, index=False).to_numpy(np.uint64)


FEW_ROWS = 1 << 20  # keys hashed here, without pandas
