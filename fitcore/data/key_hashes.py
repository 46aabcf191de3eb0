"""pandas' hash of key texts, computed with numpy for every text at once (no pandas import: 0.4–0.8 s of a fit).

``hash_pandas_object(DataFrame(columns), index=False)`` of text columns is, for each text, SipHash-2-4 (Aumasson
and Bernstein's reference, pandas' fixed key) of its UTF-8, mixed as pandas mixes its 64-bit hashes, the
columns combined as pandas combines them.  Here SipHash runs on all texts side by side: their UTF-8 in one
buffer, each round one numpy operation over every text still compressing that block (texts of one
length class take the same path).  ``tests/fitcore/test_key_hashes.py`` compares with pandas and with
SipHash's published test vectors.
"""
from __future__ import annotations

import numpy as np

PANDAS_KEY = b"0123456789123456"  # pandas' default hash key
BATCH = 1 << 16  # texts hashed at a time: the (texts, 8) byte gathers stay a few MiB

_U = np.uint64


def pandas_hashes(columns: list[np.ndarray]) -> np.ndarray:
    """(N,) uint64: pandas' ``hash_pandas_object(DataFrame(columns), index=False)`` of N rows of text columns
    (each an array of ``str``)."""
    out = np.full(len(columns[0]), 0x345678, dtype=np.uint64)
    mult = _U(1000003)
    with np.errstate(over="ignore"):
        for i, column in enumerate(columns):
            hashed = siphash24_texts(column)
            hashed ^= hashed >> _U(30)
            hashed *= _U(0xBF58476D1CE4E5B9)
            hashed ^= hashed >> _U(27)
            hashed *= _U(0x94D049BB133111EB)
            hashed ^= hashed >> _U(31)
            inverse = len(columns) - i
            out ^= hashed
            out *= mult
            mult += _U(82520 + inverse + inverse)
        out += _U(97531)
    return out


def siphash24_texts(texts, key: bytes = PANDAS_KEY) -> np.ndarray:
    """(N,) uint64 SipHash-2-4 of each text's UTF-8 bytes with a 16-byte ``key``.  (Python's own encoder a
    text, ≈ 0.1 µs: not ``pyarrow.array``, which imports pandas for an object array.)"""
    texts = np.asarray(texts, dtype=object).tolist()
    out = np.empty(len(texts), np.uint64)
    for at in range(0, len(texts), BATCH):
        encoded = [text.encode("utf-8") for text in texts[at:at + BATCH]]
        offsets = np.zeros(len(encoded) + 1, np.int64)
        np.cumsum(np.fromiter(map(len, encoded), np.int64, len(encoded)), out=offsets[1:])
        out[at:at + len(encoded)] = siphash24_bytes(np.frombuffer(b"".join(encoded), np.uint8), offsets, key)
    return out


def siphash24_bytes(data: np.ndarray, offsets: np.ndarray, key: bytes = PANDAS_KEY) -> np.ndarray:
    """(N,) uint64 SipHash-2-4 of the messages ``data[offsets[i]:offsets[i + 1]]`` (uint8 bytes, int64 offsets)."""
    starts, lengths = offsets[:-1].astype(np.int64), np.diff(offsets).astype(np.int64)
    n = len(lengths)
    first = int(starts.min()) if n else 0
    padded = np.zeros(int(offsets[-1]) - first + 8 if n else 8, np.uint8)  # 8 bytes more: the last word read whole
    padded[:len(padded) - 8] = data[first:int(offsets[-1])] if n else padded[:0]
    starts = starts - first
    k0, k1 = int.from_bytes(key[:8], "little"), int.from_bytes(key[8:], "little")
    v = [np.full(n, k0 ^ 0x736F6D6570736575, np.uint64), np.full(n, k1 ^ 0x646F72616E646F6D, np.uint64),
         np.full(n, k0 ^ 0x6C7967656E657261, np.uint64), np.full(n, k1 ^ 0x7465646279746573, np.uint64)]
    whole = lengths // 8
    with np.errstate(over="ignore"):
        for block in range(int(whole.max()) if n else 0):  # texts with a whole 8-byte block here
            rows = np.flatnonzero(whole > block) if whole.min() <= block else None  # None: all
            word = _words(padded, starts if rows is None else starts[rows], 8 * block)
            _compress(v, word, rows, 2)
        tail = lengths - 8 * whole
        last = _words(padded, starts, 8 * whole)
        last &= (_U(1) << (tail.astype(np.uint64) * _U(8))) - _U(1)  # tail < 8: the bytes past the text cleared
        last |= (lengths & 0xFF).astype(np.uint64) << _U(56)
        _compress(v, last, None, 2)
        v[2] ^= _U(0xFF)
        _rounds(v, 4)
    return v[0] ^ v[1] ^ v[2] ^ v[3]


def _words(padded: np.ndarray, starts: np.ndarray, shift) -> np.ndarray:
    """(len(starts),) the little-endian 64-bit words at ``starts + shift`` in ``padded``."""
    at = (starts + shift)[:, None] + np.arange(8)
    return np.ascontiguousarray(padded[at]).view("<u8").ravel().astype(np.uint64, copy=False)


def _compress(v: list, word: np.ndarray, rows, rounds: int) -> None:
    """One message word into the state of texts ``rows`` (None: every text)."""
    if rows is None:
        v[3] ^= word
        _rounds(v, rounds)
        v[0] ^= word
        return
    part = [x[rows] for x in v]
    part[3] ^= word
    _rounds(part, rounds)
    part[0] ^= word
    for x, y in zip(v, part):
        x[rows] = y


def _rotl(x: np.ndarray, r: int) -> np.ndarray:
    return (x << _U(r)) | (x >> _U(64 - r))


def _rounds(v: list, n: int) -> None:
    """``n`` SipRounds on the state ``v`` (four uint64 arrays), in place of its entries."""
    v0, v1, v2, v3 = v
    for _ in range(n):
        v0 = v0 + v1
        v1 = _rotl(v1, 13) ^ v0
        v0 = _rotl(v0, 32)
        v2 = v2 + v3
        v3 = _rotl(v3, 16) ^ v2
        v0 = v0 + v3
        v3 = _rotl(v3, 21) ^ v0
        v2 = v2 + v1
        v1 = _rotl(v1, 17) ^ v2
        v2 = _rotl(v2, 32)
    v[:] = [v0, v1, v2, v3]
