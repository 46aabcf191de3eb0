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


def invented_controlled_dataset(n_series: int, rows_per_series: int = 70, seed: int = 0) -> fitcore.Dataset:
    """``invented_dataset``'s series with two controls — a 0/1 promotion flag (price cut in its weeks)
    and a competitor's price — and weekly dates, so ``--season`` has a date column."""
    rng = np.random.default_rng(seed + 1)
    product, price, volume = invented_arrays(n_series, rows_per_series, seed)
    total = len(price)
    promo = (rng.random(total) < 0.2).astype(float)
    rival = np.round(price * rng.uniform(0.8, 1.25, total), 2)
    weeks = np.tile(np.arange(rows_per_series), n_series) * 7 + np.repeat(rng.integers(0, 365, n_series), rows_per_series)
    date = np.datetime64("2023-01-02") + weeks.astype("timedelta64[D]")
    volume = np.round(volume * np.exp(0.4 * promo))
    names = np.char.add("item-", product.astype(str)).astype(object)
    return fitcore.from_columns({"product": names}, price * np.where(promo > 0, 0.85, 1.0).round(2), volume,
                                date=date, controls={"promo": promo, "rival_price": rival})
