"""A series' data fingerprint: the SHA-256 of its rows in date order where they have dates, so the same rows in
another order (a re-export, a file sorted by price) are the same data to the ledger (a trial found a shuffled copy
of the sample read as 155 stale sign-offs)."""
from __future__ import annotations

import hashlib

import numpy as np

import fitcore


def dataset(order: np.ndarray, dated: bool = True):
    rng = np.random.default_rng(11)
    n = 90
    product = np.repeat(np.array(["a", "b", "c"], dtype=object), 30)
    date = np.datetime64("2025-01-06", "ns") + np.tile(np.arange(30), 3).astype("timedelta64[W]")
    price, volume = rng.uniform(1, 3, n).round(2), rng.uniform(100, 300, n).round()
    weight = rng.uniform(0.5, 2, n)
    return fitcore.from_columns({"product": product[order]}, price[order], volume[order], weight=weight[order],
                                date=date[order] if dated else None)


def by_key(data) -> dict:
    return {data.key_of(s)["product"]: data.fingerprints[s] for s in range(data.n_series)}


def test_the_same_dated_rows_in_any_order_have_the_same_fingerprints():
    rng = np.random.default_rng(2)
    kept = by_key(dataset(np.arange(90)))
    for _ in range(3):
        assert by_key(dataset(rng.permutation(90))) == kept
    assert dataset(np.arange(90)).date_order is None  # a file in date order: hashed as it is, as before


def test_the_fingerprint_is_the_sha256_of_the_rows_in_date_order():
    """By definition (hashlib over the bytes of ``np.column_stack`` of price, volume, weight and the date's
    nanoseconds, a row at a time, the rows sorted by date), whatever the file's order."""
    data = dataset(np.random.default_rng(4).permutation(90))
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        table = np.column_stack([data.price[rows], data.volume[rows], data.weight[rows],
                                 data.date[rows].view(np.int64)])[np.argsort(data.date[rows], kind="stable")]
        assert data.fingerprints[s] == hashlib.sha256(np.ascontiguousarray(table).tobytes()).hexdigest()


def test_undated_rows_in_another_order_are_other_data():
    """Without dates nothing says which order is the data's own: the README says a reordered undated file
    reads as changed."""
    kept, moved = by_key(dataset(np.arange(90), dated=False)), by_key(dataset(np.random.default_rng(2).permutation(90),
                                                                          dated=False))
    assert all(moved[key] != kept[key] for key in kept)
