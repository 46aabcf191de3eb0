"""How each series' rows are held out: one class per fold scheme, validated where it is built.

Every scheme cuts each series into contiguous *blocks* of a working row
order (``FoldLayout``); the fits train on blocks, and say how wrong they are
on the blocks held out:

- ``KFold`` (``--fold-order given``): file order; K blocks with scikit-learn
  ``KFold(shuffle=False)`` sizes (the first ``n mod K`` blocks hold
  ``n // K + 1`` rows, the rest ``n // K``).  Fold f holds out block f and
  trains on the others.
- ``ShuffledKFold`` (``shuffled``, the default): the same blocks over a
  seeded permutation of the series' rows drawn from their dates (else their
  prices and volumes: ``shuffle``), the same on every machine, whatever
  other series share the file or the partition, and in any row order.
- ``TimeFolds`` (``time``): rows sorted by date; K + 1 blocks as scikit-learn
  ``TimeSeriesSplit(n_splits=K)`` (each test block ``n // (K + 1)`` rows, the
  remainder goes to the first training block).  Fold f trains on blocks
  0..f and holds out block f + 1 (rolling origin).
- ``LeaveOneOut`` (``--folds loo``): one block, the whole series, fitted
  once; each row's held-out error comes exactly from the hat matrix
  (PRESS), not from n refits.

With weights, a row of weight 0 tells a fit nothing, so no fold may hold
out such rows alone (a fold of no weight has no error to average): each
scheme deals a series' rows of positive weight as if they were all its rows,
and its rows of weight 0 sit in a block of their own that no fold holds out
(``FoldScheme.layout``, ``weighed_layout``).

A scheme also says which of a family's two ways of computing held-out
errors applies (``held_out``), how those errors are summarised (``scores``),
and what a failed fold means (``fold_failure``).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..errors import SettingsError
from . import reasons
from .scores import Moments, Scores, fold_scores, row_scores
from .shuffle import row_values, shuffle_order
from .weights import weighed_counts

ORDERS = ("shuffled", "given", "time")


@dataclass(frozen=True, eq=False)
class FoldLayout:
    """Row order and block boundaries for a set of series.

    - ``order``: (N,) int64 dataset row of each working position, or None when
      the working order is the dataset order.
    - ``bounds``: (S, B + 1) int64 working positions; block b of series s is
      ``bounds[s, b]:bounds[s, b + 1]``.
    - ``held_out``: (K,) the block each fold holds out (none for leave-one-out).
    - ``cumulative``: False → fold f trains on every block but its own;
      True → on the blocks before the one it holds out.
    - ``usable``: (S,) bool, the series has enough rows (of positive weight) for the scheme.
    """

    order: np.ndarray | None
    bounds: np.ndarray
    held_out: np.ndarray
    cumulative: bool
    usable: np.ndarray

    @property
    def n_folds(self) -> int:
        return len(self.held_out)


class FoldScheme:
    """One way of holding rows out.  Subclasses supply ``layout`` and the attributes below."""

    fewest_folds: int  # a series must split into at least this many folds (the reason's sentence)
    fold_failure: int  # the reason code when a held-out fit is undefined
    comparable_folds: bool  # whether its held-out errors are per fold, so folds can be compared
    keyed = False  # whether its layout depends on the series' key hashes and the rows' values

    def layout(self, offsets: np.ndarray, *, weight: np.ndarray | None = None, key_hash: np.ndarray | None = None,
               date: np.ndarray | None = None, price: np.ndarray | None = None, volume: np.ndarray | None = None,
               more=()) -> FoldLayout:
        """The rows' layout; ``key_hash`` (S,), ``date``, ``price``, ``volume`` and ``more`` (N,) each (the
        weight and control columns) where the scheme uses them (``keyed``: the key hashes and the rows' values;
        ``TimeFolds``: the dates).

        ``weight`` (N,): rows of weight 0 tell a fit nothing, so the scheme's blocks are made of each
        series' rows of positive weight alone; its rows of weight 0 go first, in a block of their own that
        every fold trains on (where it adds nothing) and none holds out (``weighed_layout``)."""
        rows = dict(key_hash=key_hash, date=date, price=price, volume=volume, more=more)
        if weight is None or not (weight == 0).any():
            return self.blocks(offsets, **rows)
        return weighed_layout(self, offsets, weight > 0, rows)

    def blocks(self, offsets: np.ndarray, *, key_hash=None, date=None, price=None, volume=None,
               more=()) -> FoldLayout:
        """The scheme's own layout of every row (``layout``'s arguments but the weight)."""
        raise NotImplementedError

    def error_counts(self, counts: np.ndarray) -> np.ndarray:
        """(S,) how many held-out errors each series gets (one per fold, or one per row)."""
        raise NotImplementedError

    def check_rows(self, counts: np.ndarray, default: int) -> None:
        """``SettingsError`` where the scheme asks more of the series' row counts than any has (none here)."""

    def held_out(self, family, work):
        """The family's held-out errors for this scheme (``family.fold_errors`` or ``family.row_errors``)."""
        raise NotImplementedError

    def scores(self, errors: np.ndarray, offsets: np.ndarray, w: np.ndarray | None, mom: Moments) -> Scores:
        raise NotImplementedError

    def keep(self, available: np.ndarray, counts: np.ndarray) -> np.ndarray:
        """Which entries of ``Scores.fold_err`` belong to available cells (broadcastable to it)."""
        raise NotImplementedError

    def fold_ids(self, offsets: np.ndarray, **kwargs) -> np.ndarray:
        """(N,) the fold that holds out each dataset row; -1 for rows never held out."""
        lay = self.layout(offsets, **kwargs)
        widths = np.diff(lay.bounds, axis=1).ravel()
        block = np.repeat(np.tile(np.arange(lay.bounds.shape[1] - 1), len(lay.bounds)), widths)
        fold_of_block = np.full(lay.bounds.shape[1] - 1, -1)
        fold_of_block[lay.held_out] = np.arange(lay.n_folds)
        ids = np.empty(int(offsets[-1]), dtype=np.int64)
        ids[lay.order if lay.order is not None else slice(None)] = fold_of_block[block]
        return ids

    def split(self, offsets: np.ndarray, series: int, **kwargs):
        """Yield ``(train, test)`` dataset-row index arrays for one series, fold by fold."""
        lo, hi = int(offsets[series]), int(offsets[series + 1])
        ids = self.fold_ids(offsets, **kwargs)[lo:hi]
        rows = np.arange(lo, hi)
        for f in range(self.fewest_folds):
            yield rows[ids != f], rows[ids == f]


class KFold(FoldScheme):
    """K contiguous blocks of the rows in file order (scikit-learn ``KFold(shuffle=False)`` sizes)."""

    fold_failure = reasons.RANK_FOLD
    comparable_folds = True

    def __init__(self, k: int) -> None:
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 2:
            raise SettingsError(f"expected --folds to be a whole number of at least 2 or 'loo', got {k!r}")
        self.k = self.fewest_folds = int(k)

    def order(self, offsets: np.ndarray, key_hash, date, price, volume, more) -> np.ndarray | None:
        return None

    def blocks(self, offsets, *, key_hash=None, date=None, price=None, volume=None, more=()) -> FoldLayout:
        counts = np.diff(offsets)
        inner = kfold_bounds(counts, self.k)
        return FoldLayout(self.order(offsets, key_hash, date, price, volume, more), inner + offsets[:-1, None],
                          np.arange(self.k), False, counts >= self.k)

    def error_counts(self, counts):
        return np.full(len(counts), self.k, dtype=np.int64)

    def check_rows(self, counts: np.ndarray, default: int) -> None:
        """``SettingsError`` where K is above the ``default`` and no series has the rows for it: every one would be
        left without a model, and the held-out errors' table (K a series) alone can take more memory than the
        machine has (``--folds 1000000000`` on 624 rows asked numpy for 44.7 GiB; 100000 ran 10 minutes: a
        trial).  At the default or below, short series are each said as such (``few-points``), as ever."""
        longest = int(counts.max()) if len(counts) else 0
        if len(counts) and self.k > max(longest, default):
            raise SettingsError(f"--folds {self.k:,} is more folds than the longest series has rows ({longest:,}); "
                                f"give at most {longest:,}, or 'loo' (leave-one-out)")

    def held_out(self, family, work):
        return family.fold_errors(work)

    def scores(self, errors, offsets, w, mom):
        return fold_scores(errors, mom)

    def keep(self, available, counts):
        return available[:, None, :]


class ShuffledKFold(KFold):
    """The ``KFold`` blocks over a seeded permutation of each series' rows (``shuffle``)."""

    keyed = True

    def __init__(self, k: int, seed: int) -> None:
        super().__init__(k)
        if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
            raise SettingsError(f"expected --seed to be a non-negative whole number, got {seed!r}")
        self.seed = int(seed)

    def order(self, offsets, key_hash, date, price, volume, more):
        return shuffle_order(offsets, key_hash, self.seed, row_values(date, price, volume, more))


def check_time_order(fold_order: str, has_date: bool) -> None:
    """Time-ordered folds need a date column: the one place that says so (options and engine alike)."""
    if fold_order == "time" and not has_date:
        raise SettingsError("--fold-order time needs the date column: add --date COLUMN (settings file: "
                            "date in [columns])")


class TimeFolds(KFold):
    """Rolling origin over the rows sorted by date (scikit-learn ``TimeSeriesSplit`` block sizes)."""

    def blocks(self, offsets, *, key_hash=None, date=None, price=None, volume=None, more=()) -> FoldLayout:
        check_time_order("time", date is not None)
        counts = np.diff(offsets)
        series = np.repeat(np.arange(len(counts)), counts)
        order = np.lexsort((np.arange(len(series)), date.view(np.int64), series))
        inner = time_bounds(counts, self.k)
        return FoldLayout(order, inner + offsets[:-1, None], np.arange(1, self.k + 1), True, counts >= self.k + 1)

    def split(self, offsets, series, **kwargs):
        lo, hi = int(offsets[series]), int(offsets[series + 1])
        ids = self.fold_ids(offsets, **kwargs)[lo:hi]
        rows = np.arange(lo, hi)
        for f in range(self.k):  # rows of the first block carry id -1: always in training
            yield rows[ids < f], rows[ids == f]


class LeaveOneOut(FoldScheme):
    """Every row held out once, exactly (hat matrix), from the one fit on all rows."""

    fewest_folds = 2
    fold_failure = reasons.LEVERAGE_ONE
    comparable_folds = False

    def layout(self, offsets, *, weight=None, **rows) -> FoldLayout:
        """One block of every row, in dataset order: a row of weight 0 is left out of the fit by its weight
        and of the scores by their weighted sums (``scores.row_scores``); a series needs two rows of
        positive weight."""
        lay = self.blocks(offsets)
        if weight is None:
            return lay
        return replace(lay, usable=weighed_counts(weight, offsets) >= 2)

    def blocks(self, offsets, *, key_hash=None, date=None, price=None, volume=None, more=()) -> FoldLayout:
        counts = np.diff(offsets)
        return FoldLayout(None, np.stack([offsets[:-1], offsets[1:]], axis=1), np.zeros(0, np.int64), False,
                          counts >= 2)

    def error_counts(self, counts):
        return np.asarray(counts, dtype=np.int64)

    def held_out(self, family, work):
        return family.row_errors(work)

    def scores(self, errors, offsets, w, mom):
        return row_scores(errors, offsets, w, mom)

    def keep(self, available, counts):
        return np.repeat(available, counts, axis=0)

    def fold_ids(self, offsets, **kwargs):
        """Each row is its own fold: its position within its series."""
        counts = np.diff(offsets)
        return np.arange(int(offsets[-1])) - np.repeat(offsets[:-1], counts)

    def split(self, offsets, series, **kwargs):
        rows = np.arange(int(offsets[series]), int(offsets[series + 1]))
        for i in range(len(rows)):
            yield np.delete(rows, i), rows[i:i + 1]


def weighed_layout(scheme: FoldScheme, offsets: np.ndarray, positive: np.ndarray, rows: dict) -> FoldLayout:
    """``scheme``'s blocks over the rows ``positive`` (N,) of each series, after a first block of the others.

    The scheme lays out the rows of positive weight as if they were all there is (the same blocks, shuffle
    and time order as a file of those rows alone); each series' rows of weight 0 come first, in dataset
    order, as block 0, which no fold holds out (``held_out`` moves up by one) and every fold trains on."""
    offsets = np.asarray(offsets, dtype=np.int64)
    counts = np.diff(offsets)
    keep = np.flatnonzero(positive)
    n_pos = weighed_counts(positive, offsets)  # a count a series: a cumulative sum of every row costs 5× more
    sub_offsets = np.concatenate(([0], np.cumsum(n_pos))).astype(np.int64)
    zeros = counts - n_pos
    picked = {name: None if value is None else value if name == "key_hash" else value[keep]
              for name, value in rows.items() if name != "more"}
    sub = scheme.blocks(sub_offsets, more=[values[keep] for values in rows.get("more", ())], **picked)
    shift = offsets[:-1] + zeros - sub_offsets[:-1]  # a series' positive rows start after its rows of weight 0
    order = np.empty(int(offsets[-1]), dtype=np.int64)
    order[np.arange(len(keep)) + np.repeat(shift, n_pos)] = keep if sub.order is None else keep[sub.order]
    zero_rows = np.flatnonzero(~positive)  # grouped by series, as the rows are
    zero_first = np.concatenate(([0], np.cumsum(zeros)))[:-1]
    order[np.arange(len(zero_rows)) + np.repeat(offsets[:-1] - zero_first, zeros)] = zero_rows
    bounds = np.concatenate((offsets[:-1, None], sub.bounds + shift[:, None]), axis=1)
    return FoldLayout(order, bounds, sub.held_out + 1, sub.cumulative, sub.usable)


def scheme_of(folds: int | str, fold_order: str, seed: int) -> FoldScheme:
    """The scheme the settings name: ``folds`` K or ``"loo"``, ``fold_order`` one of ``ORDERS``."""
    if fold_order not in ORDERS:
        raise SettingsError(f"expected --fold-order to be one of {', '.join(ORDERS)}, got {fold_order!r}")
    if folds == "loo":
        if fold_order != "shuffled":
            raise SettingsError("--fold-order does not apply to --folds loo (every point is held out once)")
        return LeaveOneOut()
    if fold_order == "shuffled":
        return ShuffledKFold(folds, seed)
    return KFold(folds) if fold_order == "given" else TimeFolds(folds)


def fold_scheme(settings) -> FoldScheme:
    """The scheme of a ``FitSettings``."""
    return scheme_of(settings.folds, settings.fold_order, settings.seed)


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


def fold_ids(offsets: np.ndarray, settings, **rows) -> np.ndarray:
    """(N,) the fold that holds out each dataset row under ``settings``; -1 for rows never held out.
    ``rows``: ``key_hash``, ``date``, ``price``, ``volume``, ``more`` as ``FoldScheme.layout`` takes them."""
    return fold_scheme(settings).fold_ids(offsets, **rows)


def dataset_rows(data) -> dict:
    """A ``Dataset``'s weights, key hashes and rows as ``fold_ids`` and ``split_indices`` take them."""
    return {"weight": data.weight, "key_hash": data.key_hash, "date": data.date, "price": data.price,
            "volume": data.volume, "more": deal_columns(data)}


def deal_columns(data) -> list[np.ndarray]:
    """The columns beyond price and volume an undated row's draw mixes in: its weight and control values."""
    return ([] if data.weight is None else [data.weight]) + [data.controls[name] for name in sorted(data.controls)]


def split_indices(offsets: np.ndarray, settings, series: int, **kwargs):
    """Yield ``(train, test)`` dataset-row index arrays for one series under ``settings``, fold by fold."""
    yield from fold_scheme(settings).split(offsets, series, **kwargs)
