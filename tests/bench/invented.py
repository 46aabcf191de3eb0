"""Invented price–volume series for benchmarks (seeded; no real data)."""
from __future__ import annotations

import numpy as np

import fitcore


def invented_arrays(n_series: int, rows_per_series: int = 70, seed: int = 0):
    rng = np.random.default_rng(seed)
    counts = np.full(n_series, rows_per_series)
    total = n_series * rows_per_series
    base = np.repeat(rng.uniform(0.5, 400, n_series), counts)
    price = np.round(base * rng.uniform(0.7, 1.3, total), 2)
    elasticity = np.repeat(rng.uniform(-3, -0.3, n_series), counts)
    volume = np.round(np.repeat(rng.uniform(20, 5000, n_series), counts)
                      * (price / base) ** elasticity * rng.lognormal(0, 0.2, total))
    product = np.repeat(np.arange(n_series), counts)
    return product, price, volume


def invented_dataset(n_series: int, rows_per_series: int = 70, seed: int = 0) -> fitcore.Dataset:
    product, price, volume = invented_arrays(n_series, rows_per_series, seed)
    names = np.char.add("item-", product.astype(str)).astype(object)
    return fitcore.from_columns({"product": names}, price, volume)
