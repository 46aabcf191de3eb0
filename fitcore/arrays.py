"""Arrow arrays to numpy without pandas (``Array.to_numpy`` imports it: 0.3 s at start-up)."""
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
    import pyarrow as pa
    values = np.ascontiguousarray(values, dtype=np.int64)
    return pa.Array.from_buffers(pa.int64(), len(values), [None, pa.py_buffer(values)])


def texts(values: list[str]):
    """An Arrow string array of Python strings, built from its buffers (``pa.array`` would import pandas)."""
    import pyarrow as pa
    encoded = [v.encode("utf-8") for v in values]
    offsets = np.zeros(len(encoded) + 1, dtype=np.int32)
    np.cumsum([len(v) for v in encoded], out=offsets[1:])
    return pa.Array.from_buffers(pa.string(), len(encoded), [None, pa.py_buffer(offsets), pa.py_buffer(b"".join(encoded))])


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
