"""The columns of a stored results file as numpy, read without a Python object per candidate.

A results file holds one row a candidate, C rows a series: a per-series value repeats on each of its
series' rows, a per-candidate value (a cell) sits on its own row.  ``CellColumn`` and ``StoredCovariances``
read one series' cells when it is looked at; ``per_series`` and ``per_series_text`` take each series' first
row; ``column_values`` converts a whole column.
"""
from __future__ import annotations

import numpy as np

from ..arrays import integers, numbers, objects


class CellColumn:
    """(S, C) or (S, C, P) values of a per-candidate column, read from the Arrow table one series at a time.

    ``column[s]``, ``column[s, c]``, ``column[s, cs]``, ``column[s, c, :k]`` read series ``s``'s cells only;
    any other index (or ``np.asarray(column)``) reads the whole column.  So opening millions of series
    converts nothing per candidate until a series is looked at.
    """

    def __init__(self, column, n_s: int, n_c: int, width: int | None = None) -> None:
        self.column, self.n_c, self.width = column, n_c, width
        self.shape = (n_s, n_c) if width is None else (n_s, n_c, width)

    def __len__(self) -> int:
        return self.shape[0]

    def _block(self, s: int) -> np.ndarray:
        part = self.column.slice(s * self.n_c, self.n_c).combine_chunks()
        if self.width is not None:
            part = part.flatten()
        return numbers(part).astype(np.float64, copy=False).reshape(self.shape[1:])

    def __getitem__(self, index):
        s, rest = (index[0], index[1:]) if isinstance(index, tuple) else (index, ())
        if isinstance(s, (int, np.integer)) and 0 <= s < self.shape[0]:
            block = self._block(int(s))
            return block[rest] if rest else block
        return np.asarray(self)[index]

    def __array__(self, dtype=None, copy=None):
        values = numbers(self.column.combine_chunks().flatten() if self.width is not None
                         else self.column.combine_chunks()).astype(np.float64, copy=False).reshape(self.shape)
        return values if dtype is None else values.astype(dtype)


class Unknown:
    """(S, C) values a results file does not hold: NaN wherever read."""

    def __init__(self, shape) -> None:
        self.shape = shape

    def __getitem__(self, index):
        return np.nan

    def __array__(self, dtype=None, copy=None):
        return np.full(self.shape, np.nan, dtype=dtype)


class StoredCovariances:
    """Each candidate's unscaled covariance as the file holds it (its p·p entries row by row, an Arrow list a cell)."""

    def __init__(self, column, n_c: int, sizes, width: int) -> None:
        self.column, self.n_c, self.sizes, self.width = column, n_c, np.asarray(sizes), width

    def cells(self, series: np.ndarray) -> np.ndarray:
        """(len(series), C, P, P), NaN where the file holds none."""
        out = np.full((len(series), self.n_c, self.width, self.width), np.nan)
        for c, p in enumerate(self.sizes.tolist()):
            out[:, c, :p, :p] = self.of(series, c)
        return out

    def of(self, series: np.ndarray, c: int) -> np.ndarray:
        """(len(series), p, p) candidate ``c``'s covariance on ``series`` (NaN where unavailable)."""
        p = int(self.sizes[c])
        rows = integers(np.asarray(series, dtype=np.int64) * self.n_c + c)
        taken = self.column.take(rows).combine_chunks()
        out = np.full((len(series), p * p), np.nan)
        if len(series):
            lengths = np.diff(numbers(taken.offsets).astype(np.int64))
            values = numbers(taken.flatten())
            full = lengths == p * p
            out[full] = values.reshape(-1, p * p)
        return out.reshape(len(series), p, p)


def per_series(column, n_c: int) -> np.ndarray:
    """(S,) one value a series of a per-series column repeated on each candidate's row: text as objects
    (None for null), numbers as float (NaN for null), booleans as bool."""
    import pyarrow as pa
    if pa.types.is_string(column.type) or pa.types.is_dictionary(column.type):
        pieces = [objects(chunk)[rows] for chunk, rows in series_rows(column, n_c)]
        return np.concatenate(pieces) if pieces else np.zeros(0, dtype=object)
    values = numbers(column.combine_chunks())[::max(n_c, 1)]
    return values.astype(bool) if pa.types.is_boolean(column.type) else values.astype(float, copy=False)


def column_values(column) -> np.ndarray:
    """An Arrow column (or one still being read, ``Later``) as numpy; text as an object array (a dictionary
    column through its dictionary)."""
    import pyarrow as pa
    column = column.combine_chunks()
    if pa.types.is_dictionary(column.type) and not column.null_count:
        values = np.array(column.dictionary.to_pylist() + [None], dtype=object)[:-1]
        return values[numbers(column.indices)]
    if pa.types.is_dictionary(column.type) or pa.types.is_string(column.type):
        return np.array(column.to_pylist() + [None], dtype=object)[:-1]
    return numbers(column)


def series_rows(column, n_c: int):
    """``(chunk, rows)`` for each chunk of a per-candidate column: the chunk's rows that are a series' first
    (numpy positions within the chunk; a chunk need not start on a series)."""
    start, step = 0, max(n_c, 1)
    for chunk in getattr(column, "chunks", [column]):
        yield chunk, np.arange((-start) % step, len(chunk), step)
        start += len(chunk)


def per_series_text(column, n_c: int):
    """(S,) Arrow text: a per-series text column's value on each series' first row, taken chunk by chunk.

    Not ``column.take`` over the whole column: on a dictionary column of many row groups (each with its own
    dictionary) that first merges every dictionary (0.14 s for the fingerprints of 100,000 series; by chunk
    7 ms).  A chunk whose series each hold their own entry, in order (the keys and fingerprints as
    ``pricefold fit`` writes them), is its dictionary itself: nothing taken, and no ``pyarrow.compute``
    (0.1 s to import) before the list."""
    import pyarrow as pa
    pieces = []
    for chunk, rows in series_rows(column, n_c):
        if pa.types.is_dictionary(chunk.type) and pa.types.is_string(chunk.dictionary.type) and \
                not chunk.null_count and len(rows) == len(chunk.dictionary) and \
                (numbers(chunk.indices)[rows] == np.arange(len(rows))).all():
            pieces.append(chunk.dictionary)
            continue
        if pa.types.is_dictionary(chunk.type) and pa.types.is_string(chunk.dictionary.type) and not chunk.null_count:
            pieces.append(take_text(chunk.dictionary, numbers(chunk.indices)[rows].astype(np.int64)))
            continue
        piece = chunk.take(integers(rows))
        pieces.append(piece.dictionary_decode() if pa.types.is_dictionary(piece.type) else piece)
    if not pieces:
        return pa.array([], pa.string())
    return pa.concat_arrays(pieces) if len(pieces) > 1 else pieces[0]


def take_text(words, at: np.ndarray):
    """``words.take(at)`` for Arrow text without nulls, from its buffers (``take`` imports ``pyarrow.compute``:
    0.1 s before the list, for keys whose dictionary is not one entry a series, such as a segment's)."""
    import pyarrow as pa
    n, start = len(words), words.offset
    _, offsets, data = words.buffers()[:3]
    ends = np.frombuffer(offsets, np.int32, count=n + 1, offset=start * 4).astype(np.int64)
    lengths = np.diff(ends)[at]
    out = np.zeros(len(at) + 1, dtype=np.int64)
    np.cumsum(lengths, out=out[1:])
    if out[-1] > np.iinfo(np.int32).max:
        return words.take(integers(at))
    body = np.frombuffer(data, np.uint8) if data is not None and out[-1] else np.zeros(0, np.uint8)
    # each output byte's place in ``body``: its value's start there, plus its place within the value
    where = np.repeat(ends[:-1][at] - out[:-1], lengths) + np.arange(out[-1], dtype=np.int64)
    return pa.Array.from_buffers(pa.string(), len(at), [None, pa.py_buffer(out.astype(np.int32)),
                                                        pa.py_buffer(body[where])])
