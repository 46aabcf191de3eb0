"""Fold assignment: sizes as scikit-learn's splitters, seeded shuffles, disjoint and covering folds."""
from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import settings as hsettings
from hypothesis import strategies as st
from sklearn.model_selection import KFold, TimeSeriesSplit

import fitcore
from fitcore.fit.folds import fold_ids, shuffle_order, split_indices


def offsets_of(counts):
    return np.concatenate(([0], np.cumsum(counts))).astype(np.int64)


@given(st.lists(st.integers(1, 40), min_size=1, max_size=8), st.integers(2, 7),
       st.sampled_from(["given", "shuffled"]), st.integers(0, 2 ** 31))
@hsettings(max_examples=60, deadline=None)
def test_folds_are_disjoint_and_cover_every_row(counts, k, order, seed):
    offsets = offsets_of(counts)
    hashes = np.arange(len(counts), dtype=np.uint64) * np.uint64(7919)
    settings = fitcore.FitSettings(folds=k, fold_order=order, seed=seed)
    ids = fold_ids(offsets, settings, key_hash=hashes)
    for s, n in enumerate(counts):
        mine = ids[offsets[s]:offsets[s + 1]]
        if n >= k:
            assert sorted(np.bincount(mine, minlength=k)) == sorted(np.bincount(np.arange(n) % k, minlength=k))
        tests = [test for _, test in split_indices(offsets, settings, s, key_hash=hashes)]
        joined = np.concatenate(tests)
        assert len(joined) == len(set(joined.tolist())) == n  # disjoint, and every row held out once
        for train, test in split_indices(offsets, settings, s, key_hash=hashes):
            assert not set(train.tolist()) & set(test.tolist())
            assert len(train) + len(test) == n


def test_given_order_blocks_match_kfold():
    offsets = offsets_of([23])
    ours = [test for _, test in split_indices(offsets, fitcore.FitSettings(folds=5, fold_order="given"), 0)]
    theirs = [test for _, test in KFold(5, shuffle=False).split(np.zeros(23))]
    assert [t.tolist() for t in ours] == [t.tolist() for t in theirs]


def test_time_blocks_match_time_series_split():
    n = 31
    dates = np.datetime64("2025-01-06") + np.random.default_rng(1).permutation(n).astype("timedelta64[W]")
    settings = fitcore.FitSettings(folds=4, fold_order="time")
    ours = list(split_indices(offsets_of([n]), settings, 0, date=dates))
    order = np.argsort(dates)
    theirs = [(order[train], order[test]) for train, test in TimeSeriesSplit(4).split(np.zeros(n))]
    for (a_train, a_test), (b_train, b_test) in zip(ours, theirs):
        assert sorted(a_test.tolist()) == sorted(b_test.tolist())
        assert sorted(a_train.tolist()) == sorted(b_train.tolist())


def test_shuffle_depends_on_seed_and_series_only():
    counts = [30, 41, 17]
    hashes = np.array([11, 22, 33], dtype=np.uint64)
    settings = fitcore.FitSettings(folds=5, seed=4)
    alone = fold_ids(offsets_of(counts[1:2]), settings, key_hash=hashes[1:2])
    together = fold_ids(offsets_of(counts), settings, key_hash=hashes)[30:71]
    assert alone.tolist() == together.tolist()  # the same series, whatever its neighbours
    again = fold_ids(offsets_of(counts), settings, key_hash=hashes)
    assert again.tolist() == fold_ids(offsets_of(counts), settings, key_hash=hashes).tolist()
    other_seed = fold_ids(offsets_of(counts), fitcore.FitSettings(folds=5, seed=5), key_hash=hashes)
    assert other_seed.tolist() != again.tolist()
    # Not file order: a shuffle of 41 rows left in blocks would be astronomically unlikely.
    assert together.tolist() != sorted(together.tolist())


def test_shuffle_is_pinned_across_versions_and_machines():
    """The fold of each row for one seed, recorded when the shuffle was written.

    Pure 64-bit integer arithmetic (SplitMix64), so any platform must give
    these; a change here changes every user's cross-validation results.
    """
    data = fitcore.from_columns({"product": np.array(["a"] * 12, dtype=object)}, np.arange(1.0, 13), np.ones(12))
    ids = fold_ids(data.offsets, fitcore.FitSettings(folds=3, seed=0), key_hash=data.key_hash)
    assert ids.tolist() == PINNED


# Recorded from this implementation (not an outside reference): a regression pin.
PINNED = [2, 0, 1, 1, 2, 0, 1, 1, 2, 0, 0, 2]


def _splitmix64(x: int) -> int:
    """SplitMix64's output function (Steele, Lea & Flood 2014; constants as in Vigna's splitmix64.c)."""
    mask = 2 ** 64 - 1
    z = (x + 0x9E3779B97F4A7C15) & mask
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & mask
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & mask
    return z ^ (z >> 31)


def test_shuffle_follows_its_documented_definition():
    """Rows ordered by the top 20 bits of splitmix64(stream + position), then position (folds.py)."""
    rng = np.random.default_rng(7)
    counts = rng.integers(1, 90, 40)
    hashes = rng.integers(0, 2 ** 63, 40).astype(np.uint64) * np.uint64(2) + np.uint64(1)
    seed = 2 ** 40 + 3
    got = shuffle_order(offsets_of(counts), hashes, seed)
    start = 0
    for n, key in zip(counts.tolist(), hashes.tolist()):
        stream = _splitmix64(key ^ _splitmix64(seed))
        ranked = sorted(range(n), key=lambda j: (_splitmix64((stream + j) % 2 ** 64) >> 44, j))
        assert got[start:start + n].tolist() == [start + j for j in ranked]
        start += n


def _splitmix64_array(x: np.ndarray) -> np.ndarray:
    """``_splitmix64`` on a uint64 array (numpy's uint64 arithmetic wraps modulo 2⁶⁴)."""
    z = x + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


def test_a_series_of_two_to_the_twenty_rows_shuffles_as_the_small_ones_do():
    """A series this long takes the lexsort route for its whole chunk: its neighbours' folds must not
    change, and its own order must follow the same definition (top 20 bits of the draw, then position)."""
    big = 2 ** 20 + 1
    counts = [30, big, 17]
    hashes = np.array([11, 22, 33], dtype=np.uint64)
    seed = 4
    settings = fitcore.FitSettings(folds=5, seed=seed)
    offsets = offsets_of(counts)
    together = fold_ids(offsets, settings, key_hash=hashes)
    for s in (0, 2):
        alone = fold_ids(offsets_of(counts[s:s + 1]), settings, key_hash=hashes[s:s + 1])
        assert together[offsets[s]:offsets[s + 1]].tolist() == alone.tolist()
    stream = _splitmix64(22 ^ _splitmix64(seed))
    draws = _splitmix64_array(np.uint64(stream) + np.arange(big, dtype=np.uint64))
    expected = np.lexsort((np.arange(big), draws >> np.uint64(44)))
    got = shuffle_order(offsets, hashes, seed)[offsets[1]:offsets[2]] - offsets[1]
    np.testing.assert_array_equal(got, expected)
