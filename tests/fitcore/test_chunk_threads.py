"""Chunks fitted on two threads give the results one thread gives, in the same order.

The check value is the engine itself run on one thread over the same chunks (an invariance, no
outside source needed); the chunks are made small so that 120 series span many of them, and
series of varied lengths so that chunk edges fall at uneven places.
"""
from __future__ import annotations

import dataclasses

import numpy as np

import fitcore
from fitcore.fit import engine


def _data(n_series: int = 120):
    rng = np.random.default_rng(7)
    counts = rng.integers(3, 40, n_series)
    keys = np.repeat([f"s{i:03d}" for i in range(n_series)], counts).astype(object)
    price = np.round(rng.uniform(1.0, 9.0, counts.sum()), 2)
    volume = np.round(400 * price ** -rng.uniform(0.5, 2.0) * rng.lognormal(0, 0.2, counts.sum()), 1)
    return fitcore.from_columns({"product": keys}, price, volume)


def test_two_threads_match_one(monkeypatch):
    monkeypatch.setattr(engine, "CHUNK_ROWS", 97)  # ≈ 40 chunks for ≈ 2,600 rows
    data = _data()
    assert len(engine.series_cuts(data.offsets, engine.CHUNK_ROWS)) > 20
    seen = []
    one = fitcore.fit_batch(data, threads=1)
    two = fitcore.fit_batch(data, threads=2, progress=lambda done, total: seen.append(done))
    assert seen == sorted(seen) and seen[-1] == data.n_series  # progress in order, to the end
    for field in dataclasses.fields(one):
        a, b = getattr(one, field.name), getattr(two, field.name)
        if isinstance(a, np.ndarray):
            assert a.dtype == b.dtype and a.shape == b.shape, field.name
            assert np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"), field.name


def test_a_failing_chunk_fails_the_fit(monkeypatch):
    monkeypatch.setattr(engine, "CHUNK_ROWS", 97)
    real = engine._fit_chunk

    def broken(data, s0, *rest):
        if s0 > 50:
            raise RuntimeError("chunk failed")
        return real(data, s0, *rest)
    monkeypatch.setattr(engine, "_fit_chunk", broken)
    try:
        fitcore.fit_batch(_data(), threads=2)
    except RuntimeError as error:
        assert "chunk failed" in str(error)
    else:
        raise AssertionError("a chunk's error was lost")
