"""Shared helpers: random price–volume series for comparisons with reference libraries."""
from __future__ import annotations

import numpy as np
import pytest

import fitcore


def random_dataset(seed: int, n_series: int = 200, n_range=(12, 60), price_range=(0.5, 400.0),
                   with_weight: bool = False, with_date: bool = False) -> fitcore.Dataset:
    """Series with random prices, curved demand and noise; sizes drawn from ``n_range``."""
    rng = np.random.default_rng(seed)
    counts = rng.integers(*n_range, n_series)
    total = int(counts.sum())
    base = np.repeat(rng.uniform(*price_range, n_series), counts)
    price = np.round(base * rng.uniform(0.7, 1.3, total), 2)
    x = price / base
    volume = np.repeat(rng.uniform(50, 5000, n_series), counts) * np.exp(
        np.repeat(rng.uniform(-3, -0.2, n_series), counts) * np.log(x)) * rng.lognormal(0, 0.15, total)
    keys = {"product": np.repeat(np.array([f"item {i:04d}" for i in range(n_series)], dtype=object), counts)}
    weight = rng.uniform(0.2, 3.0, total) if with_weight else None
    date = None
    if with_date:
        start = np.datetime64("2024-01-01")
        date = np.concatenate([start + rng.permutation(c).astype("timedelta64[D]") * 7 for c in counts])
    return fitcore.from_columns(keys, price, volume, weight=weight, date=date)


def series_arrays(data: fitcore.Dataset, s: int):
    rows = slice(data.offsets[s], data.offsets[s + 1])
    return data.price[rows], data.volume[rows]


def series_folds(data: fitcore.Dataset, settings: fitcore.FitSettings, s: int):
    """Series ``s``'s price, volume and weight (ones when unweighted), and its folds' (train, test)
    positions within them, as ``fitcore.fit.folds.split_indices`` deals them."""
    from fitcore.fit.folds import dataset_rows, split_indices
    lo, hi = data.offsets[s], data.offsets[s + 1]
    splits = [(train - lo, test - lo) for train, test in
              split_indices(data.offsets, settings, s, **dataset_rows(data))]
    x, y = series_arrays(data, s)
    return x, y, np.ones_like(x) if data.weight is None else data.weight[lo:hi], splits


@pytest.fixture(scope="session")
def shared_dataset():
    return random_dataset(7, n_series=300)
