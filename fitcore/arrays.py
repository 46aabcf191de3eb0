"""Arrow arrays to numpy and back without pandas: ``Array.to_numpy``, ``pa.array``, ``pa.scalar`` and every
``pyarrow.compute`` call given a Python value import it (0.3–0.4 s), to check whether what they are handed is a
pandas object.  Here arrays are read from and made over their buffers."""
from __future__ import annotations

import numpy as np


def numbers(array) -> np.ndarray:
    """A numeric or boolean Arrow array as numpy, straight from its buffers (nulls → NaN).

    Not ``Array.to_numpy``: that imports pandas (0.3 s), most of opening a results file.
    """
    import pyarrow as pa
    n, start = len(array), array.offset
    validity, data = array.buffers()[:2]

    def bits(buffer):
        return np.unpackbits(np.frombuffer(buffer, np.uint8), bitorder="little")[start:start + n].astype(bool)

    if pa.types.is_boolean(array.type):
        values = bits(data)
    else:
        dtype = np.dtype({"double": "float64", "float": "float32"}.get(str(array.type), str(array.type)))
        values = np.frombuffer(data, dtype, count=n, offset=start * dtype.itemsize)
    if array.null_count:
        values = np.where(bits(validity), values, np.nan)
    return values


def integers(values: np.ndarray):
    """An Arrow int64 array over a numpy array's memory (``pa.array`` would import pandas)."""
    return from_numpy(np.ascontiguousarray(values, dtype=np.int64))


def from_numpy(values: np.ndarray, mask: np.ndarray | None = None, *, nan_is_null: bool = False):
    """A 1-d numeric or boolean numpy array as Arrow, as ``pa.array(values, mask=mask)`` makes it (same type,
    same values, null where ``mask`` is True), or ``pa.array(values, from_pandas=True)`` with ``nan_is_null``
    (NaN as null), over the array's own memory where it is contiguous (booleans: packed into bits)."""
    import pyarrow as pa
    values = np.ascontiguousarray(values)
    if values.ndim != 1:
        raise ValueError(f"expected a 1-d array, got {values.ndim} dimensions")
    valid = None if mask is None else ~np.asarray(mask, dtype=bool)
    if nan_is_null and values.dtype.kind == "f":
        finite = ~np.isnan(values)
        valid = finite if valid is None else valid & finite
    if values.dtype == bool:
        data = pa.py_buffer(np.packbits(values, bitorder="little"))
        kind = pa.bool_()
    else:
        data, kind = pa.py_buffer(values), pa.from_numpy_dtype(values.dtype)
    bitmap, nulls = _validity(valid)
    return pa.Array.from_buffers(kind, len(values), [bitmap, data], null_count=nulls)


def _validity(valid: np.ndarray | None):
    """(Arrow validity bitmap, null count) of ``valid``; (None, 0) where every value is valid."""
    import pyarrow as pa
    if valid is None or valid.all():
        return None, 0
    return pa.py_buffer(np.packbits(valid, bitorder="little")), int(len(valid) - np.count_nonzero(valid))


def texts(values, mask: np.ndarray | None = None):
    """Arrow text of Python strings (a list, or a numpy array of ``str`` or objects; None → null, and null
    where ``mask`` is True), built from its buffers (``pa.array`` would import pandas): ASCII text, as
    numbers and pricefold's own words are, encoded in one call."""
    import pyarrow as pa
    if isinstance(values, np.ndarray):
        values = values.tolist()
    valid = None if mask is None else ~np.asarray(mask, dtype=bool)
    if None in values:
        given = np.fromiter((value is not None for value in values), bool, len(values))
        valid = given if valid is None else valid & given
        values = ["" if value is None else value for value in values]
    joined = "".join(values)
    if joined.isascii():  # characters are bytes
        data = joined.encode("ascii")
        lengths = np.fromiter(map(len, values), np.int64, len(values))
    else:
        encoded = [value.encode("utf-8") for value in values]
        data = b"".join(encoded)
        lengths = np.fromiter(map(len, encoded), np.int64, len(encoded))
    offsets = np.zeros(len(values) + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    kind, width = (pa.string(), np.int32) if offsets[-1] < 2 ** 31 else (pa.large_string(), np.int64)
    bitmap, nulls = _validity(valid)
    return pa.Array.from_buffers(kind, len(values), [bitmap, pa.py_buffer(offsets.astype(width)), pa.py_buffer(data)],
                                 null_count=nulls)


def repeated(text: str, n: int):
    """Arrow text: ``text`` ``n`` times."""
    import pyarrow as pa
    data = text.encode("utf-8")
    offsets = (np.arange(n + 1, dtype=np.int64) * len(data)).astype(np.int32)
    return pa.Array.from_buffers(pa.string(), n, [None, pa.py_buffer(offsets), pa.py_buffer(data * n)])


def text(value: str):
    """One Arrow text scalar (what ``pyarrow.compute`` takes for a constant without ``pa.scalar``)."""
    return texts([value])[0]


def objects(array) -> np.ndarray:
    """Arrow text (strings, or a dictionary of them) as a numpy object array of ``str``, None for null,
    from its buffers: ``to_pylist`` makes an Arrow scalar on the way to each string (10× slower)."""
    import pyarrow as pa
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    if pa.types.is_dictionary(array.type):
        words = np.append(objects(array.dictionary), None)
        index = numbers(array.indices)
        return words[np.where(np.isnan(index), len(words) - 1, index).astype(np.int64) if array.null_count
                     else index.astype(np.int64, copy=False)]
    if not (pa.types.is_string(array.type) or pa.types.is_large_string(array.type)):
        raise TypeError(f"expected Arrow text, got {array.type}")
    n, start = len(array), array.offset
    validity, offsets, data = array.buffers()[:3]
    width = np.int64 if pa.types.is_large_string(array.type) else np.int32
    bounds = np.frombuffer(offsets, width, count=n + 1, offset=start * np.dtype(width).itemsize).tolist() if n else [0]
    raw = data.to_pybytes()[bounds[0]:bounds[-1]] if data is not None else b""
    first = bounds[0]
    if raw.isascii():  # byte offsets are character offsets: one decode, then slices
        text = raw.decode("ascii")
        out = [text[a - first:b - first] for a, b in zip(bounds, bounds[1:])]
    else:
        out = [raw[a - first:b - first].decode("utf-8") for a, b in zip(bounds, bounds[1:])]
    values = np.array(out + [None], dtype=object)[:-1]
    if array.null_count:
        valid = np.unpackbits(np.frombuffer(validity, np.uint8), bitorder="little")[start:start + n].astype(bool)
        values[~valid] = None
    return values
