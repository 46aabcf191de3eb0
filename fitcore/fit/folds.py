"""How each series' rows are dealt into cross-validation folds.

Every series is cut into contiguous *blocks* of a working row order:

- ``given``: file order; K blocks with scikit-learn ``KFold(shuffle=False)``
  sizes (the first ``n mod K`` blocks hold ``n // K + 1`` rows, the rest
  ``n // K``).  Fold f holds out block f and trains on the others.
- ``shuffled``: the same blocks over a seeded permutation of the series'
  rows.  The permutation depends only on the seed, the series key and the
  rows' positions within the series, so it is the same on every machine and
  whatever other series share the file or the partition.
- ``time``: rows sorted by date; K + 1 blocks as scikit-learn
  ``TimeSeriesSplit(n_splits=K)`` (each test block ``n // (K + 1)`` rows, the
  remainder goes to the first training block).  Fold f trains on blocks
  0..f and holds out block f + 1 (rolling origin).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compiled import compiled
from .settings import FitSettings


@dataclass(frozen=True, eq=False)
class FoldLayout:
    """Row order and block boundaries for a set of series.

    - ``order``: (N,) int64 dataset row of each working position, or None when
      the working order is the dataset order.
    - ``bounds``: (S, B + 1) int64 working positions; block b of series s is
      ``bounds[s, b]:bounds[s, b + 1]``.
    - ``held_out``: (K,) the block each fold holds out.
    - ``cumulative``: False → fold f trains on every block but its own;
      True → on the blocks before the one it holds out.
    - ``usable``: (S,) bool, every fold has rows to train on and to test.
    """

    order: np.ndarray | None
    bounds: np.ndarray
    held_out: np.ndarray
    cumulative: bool
    usable: np.ndarray

    @property
    def n_folds(self) -> int:
        return len(self.held_out)


def kfold_bounds(counts: np.ndarray, k: int) -> np.ndarray:
    """(S, k + 1) block starts within each series, ``KFold`` sizes."""
    q, r = np.divmod(counts, k)
    b = np.arange(k + 1)
    return b * q[:, None] + np.minimum(b, r[:, None])


def time_bounds(counts: np.ndarray, k: int) -> np.ndarray:
    """(S, k + 2) block starts within each series, ``TimeSeriesSplit`` sizes."""
    size = counts // (k + 1)
    first = counts - k * size
    b = np.arange(k + 2)
    return np.where(b == 0, 0, first[:, None] + (b - 1) * size[:, None])


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


def layout(offsets: np.ndarray, settings: FitSettings, *, key_hash: np.ndarray | None = None,
           date: np.ndarray | None = None) -> FoldLayout:
    """The fold layout of the series whose rows are ``offsets`` apart."""
    counts = np.diff(offsets)
    k = int(settings.folds)
    if settings.fold_order == "time":
        if date is None:
            raise ValueError("time-ordered folds need a date column")
        series = np.repeat(np.arange(len(counts)), counts)
        order = np.lexsort((np.arange(len(series)), date.view(np.int64), series))
        inner = time_bounds(counts, k)
        return FoldLayout(order, inner + offsets[:-1, None], np.arange(1, k + 1), True, counts >= k + 1)
    order = shuffle_order(offsets, key_hash, settings.seed) if settings.fold_order == "shuffled" else None
    inner = kfold_bounds(counts, k)
    return FoldLayout(order, inner + offsets[:-1, None], np.arange(k), False, counts >= k)


def fold_ids(offsets: np.ndarray, settings: FitSettings, *, key_hash: np.ndarray | None = None,
             date: np.ndarray | None = None) -> np.ndarray:
    """(N,) the fold that holds out each dataset row; -1 for rows never held out."""
    lay = layout(offsets, settings, key_hash=key_hash, date=date)
    block = np.repeat(np.tile(np.arange(lay.bounds.shape[1] - 1), len(lay.bounds)), np.diff(lay.bounds, axis=1).ravel())
    fold_of_block = np.full(lay.bounds.shape[1] - 1, -1)
    fold_of_block[lay.held_out] = np.arange(lay.n_folds)
    ids = np.empty(int(offsets[-1]), dtype=np.int64)
    ids[lay.order if lay.order is not None else slice(None)] = fold_of_block[block]
    return ids


def split_indices(offsets: np.ndarray, settings: FitSettings, series: int, **kwargs):
    """Yield ``(train, test)`` dataset-row index arrays for one series, fold by fold."""
    lo, hi = int(offsets[series]), int(offsets[series + 1])
    ids = fold_ids(offsets, settings, **kwargs)[lo:hi]
    rows = np.arange(lo, hi)
    cumulative = settings.fold_order == "time"
    for f in range(int(settings.folds)):
        # Rows of block 0 of a time layout carry id -1: always in training.
        yield (rows[ids < f] if cumulative else rows[ids != f]), rows[ids == f]


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
