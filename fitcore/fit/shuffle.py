"""The seeded shuffle of each series' rows (SplitMix64), the same on every machine.

Row j of a series draws splitmix64(stream + j), its stream seeded by the
series' key hash and the seed; rows are ordered by the top 20 bits of their
draw, then by position.  So a series' order depends only on the seed, its
key and its rows' positions: not on the machine, nor on which other series
share the file, the chunk or the Dask partition.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled


def shuffle_order(offsets: np.ndarray, key_hash: np.ndarray, seed: int) -> np.ndarray:
    """(N,) a seeded permutation of each series' rows, series kept contiguous.

    Rows are ordered by the top 20 bits of their draw (``shuffle_draws``),
    then by position; one numpy sort of packed keys does every series at once
    (a lexsort to the same order when a series has 2²⁰ rows or more).
    """
    offsets = offsets.astype(np.int64)
    counts = np.diff(offsets)
    n = int(offsets[-1])
    seed = np.uint64(int(seed) % 2 ** 64)
    if len(counts) < 2 ** 23 and (n == 0 or counts.max() < 2 ** 20):
        packed = np.empty(n, dtype=np.int64)
        shuffle_draws(offsets, key_hash.astype(np.uint64), seed, packed, np.empty(0, np.uint64))
        packed.sort()
        unpack_rows(packed, offsets)
        return packed
    # Too many rows or series to pack: the same order (top 20 bits of the draw, then position) by a
    # lexsort, so a series' folds never depend on which other series share its chunk.
    draws = np.empty(n, dtype=np.uint64)
    shuffle_draws(offsets, key_hash.astype(np.uint64), seed, np.empty(0, np.int64), draws)
    series = np.repeat(np.arange(len(counts)), counts)
    return np.lexsort((np.arange(n) - offsets[series], draws >> np.uint64(TOP_BITS_SHIFT), series))


TOP_BITS_SHIFT = 44  # a row's shuffle key is the top 64 − 44 = 20 bits of its draw


@compiled
def _splitmix64(x):
    z = x + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


@compiled
def unpack_rows(packed, offsets):
    """Sorted packed keys (series | draw | j, as ``shuffle_draws`` makes them) → dataset rows, in place."""
    for i in range(len(packed)):
        packed[i] = offsets[packed[i] >> 40] + (packed[i] & (2 ** 20 - 1))


@compiled
def shuffle_draws(offsets, key_hash, seed, packed, draws):
    """Row j of series s draws splitmix64(stream_s + j), stream_s = splitmix64(key_hash_s ^ splitmix64(seed)).

    Fills ``draws`` with the whole draws when it is not empty; otherwise
    ``packed`` with series (23 bits) | the draw's top 20 bits | j (20 bits),
    whose ascending order is the shuffled order of every series at once.
    """
    salt = _splitmix64(np.uint64(seed))
    whole = len(draws) > 0
    for s in range(len(offsets) - 1):
        start = offsets[s]
        stream = _splitmix64(key_hash[s] ^ salt)
        for j in range(offsets[s + 1] - start):
            draw = _splitmix64(stream + np.uint64(j))
            if whole:
                draws[start + j] = draw
            else:
                packed[start + j] = (s << 40) | (np.int64(draw >> np.uint64(TOP_BITS_SHIFT)) << 20) | j
