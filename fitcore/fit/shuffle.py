"""The seeded shuffle of each series' rows (SplitMix64), the same on every machine and in any row order.

A row's draw mixes its series' stream (the series' key hash and the seed)
with the row itself: its date where the rows have dates (one row a date in a
series: repeats are rejected), else its price, its volume, then its weight
and control values where the fit has them (their IEEE bits).  Rows are
ordered by their draws; rows alike in what was drawn from (and so drawing
alike) keep their order among themselves.  So a series' order depends only
on the seed, its key and its rows' values: not on the machine, on which
other series share the file, the chunk or the Dask partition, nor on the
order of the rows in the file.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled, readonly


def row_values(date: np.ndarray | None, price: np.ndarray, volume: np.ndarray, more=()) -> list[np.ndarray]:
    """What a row's draw is mixed from, as 64-bit words: its date, else its price, volume and ``more`` (its
    weight and control values, where the fit has them: rows alike in price and volume told apart by them)."""
    if date is not None:
        return [date.view(np.int64).view(np.uint64)]
    return [np.ascontiguousarray(values, dtype=np.float64).view(np.uint64) for values in (price, volume, *more)]


def shuffle_order(offsets: np.ndarray, key_hash: np.ndarray, seed: int, values: list[np.ndarray]) -> np.ndarray:
    """(N,) a seeded permutation of each series' rows, series kept contiguous, ordered by the rows' draws.

    ``values``: ``row_values`` of the rows.  One numpy sort of packed keys
    (series | the draw's top 20 bits | position) does every series at once;
    the rare runs of equal top bits are then put in the order of the whole
    draws (``unpack_rows``).  A lexsort gives the same order where a series
    has 2²⁰ rows or more.
    """
    offsets = offsets.astype(np.int64)
    counts = np.diff(offsets)
    n = int(offsets[-1])
    draws = row_draws(offsets, key_hash, seed, values)
    if len(counts) < 2 ** 23 and (n == 0 or counts.max() < 2 ** 20):
        packed = np.empty(n, dtype=np.int64)
        pack_keys(readonly(offsets), readonly(draws), packed)
        packed.sort()
        unpack_rows(packed, readonly(offsets), readonly(draws))
        return packed
    # Too many rows or series to pack: the same order, so a series' folds never depend on which other
    # series share its chunk.
    series = np.repeat(np.arange(len(counts)), counts)
    return np.lexsort((np.arange(n), draws, series))


def row_draws(offsets: np.ndarray, key_hash: np.ndarray, seed: int, values: list[np.ndarray]) -> np.ndarray:
    """(N,) each row's draw: splitmix64 of its series' stream mixed with each of its ``values`` in turn."""
    draws = np.empty(int(offsets[-1]), dtype=np.uint64)
    series_streams(readonly(offsets.astype(np.int64)), readonly(key_hash.astype(np.uint64)),
                   np.uint64(int(seed) % 2 ** 64), draws)
    for words in values:
        mix_in(draws, readonly(np.ascontiguousarray(words, dtype=np.uint64)))
    return draws


TOP_BITS_SHIFT = 44  # a packed key holds the top 64 − 44 = 20 bits of its row's draw


@compiled(inline=True)
def _splitmix64(x):
    z = x + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


@compiled
def series_streams(offsets, key_hash, seed, draws):
    """Every row of series s starts from stream_s = splitmix64(key_hash_s ^ splitmix64(seed))."""
    salt = _splitmix64(seed)
    for s in range(len(offsets) - 1):
        stream = _splitmix64(key_hash[s] ^ salt)
        for i in range(offsets[s], offsets[s + 1]):
            draws[i] = stream


@compiled
def mix_in(draws, words):
    """draw ← splitmix64(draw ^ word), row by row."""
    for i in range(len(draws)):
        draws[i] = _splitmix64(draws[i] ^ words[i])


@compiled
def pack_keys(offsets, draws, packed):
    """series (23 bits) | the draw's top 20 bits | position j (20 bits): sorted, the rows in order of
    their draws' top bits, then position."""
    for s in range(len(offsets) - 1):
        start = offsets[s]
        for j in range(offsets[s + 1] - start):
            packed[start + j] = (s << 40) | (np.int64(draws[start + j] >> np.uint64(TOP_BITS_SHIFT)) << 20) | j


@compiled
def unpack_rows(packed, offsets, draws):
    """Sorted packed keys → dataset rows, in place; then each run of rows whose draws share their top
    bits sorted by the whole draws (insertion, so rows drawing alike keep their order)."""
    for i in range(len(packed)):
        packed[i] = offsets[packed[i] >> 40] + (packed[i] & (2 ** 20 - 1))
    for s in range(len(offsets) - 1):
        for i in range(offsets[s] + 1, offsets[s + 1]):
            row = packed[i]
            draw = draws[row]
            k = i
            while k > offsets[s]:
                before = draws[packed[k - 1]]
                if before >> np.uint64(TOP_BITS_SHIFT) != draw >> np.uint64(TOP_BITS_SHIFT) or before <= draw:
                    break
                packed[k] = packed[k - 1]
                k -= 1
            packed[k] = row
