"""Properties that must hold for any data: unit invariance and degenerate series."""
from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, assume, given
from hypothesis import settings as hsettings
from hypothesis import strategies as st

import fitcore

PRICES = st.lists(st.floats(0.5, 50.0, allow_nan=False), min_size=8, max_size=40)


def one_series(price, volume, dated: bool = False):
    """One series; ``dated``: weekly dates, so its shuffled folds follow them, not its prices and volumes."""
    n = len(price)
    date = np.datetime64("2024-01-01") + 7 * np.arange(n).astype("timedelta64[D]") if dated else None
    return fitcore.from_columns({"product": np.array(["p"] * n, dtype=object)}, np.asarray(price, float),
                                np.asarray(volume, float), date=date)


@given(PRICES, st.integers(0, 2 ** 32 - 1), st.sampled_from([0.01, 100.0, 7.3]), st.sampled_from([1e-3, 1e3, 3.0]))
@hsettings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
def test_choice_does_not_depend_on_units(prices, seed, price_factor, volume_factor):
    rng = np.random.default_rng(seed)
    price = np.round(np.array(prices), 2)
    assume(len(np.unique(price)) >= 4)
    volume = 500 * np.exp(-rng.uniform(0.1, 2) * np.log(price / price.mean())) * rng.lognormal(0, 0.2, len(price))
    # Dated: undated rows are dealt by their prices' and volumes' bits, which other units change.
    base = fitcore.fit_batch(one_series(price, volume, dated=True))
    scaled = fitcore.fit_batch(one_series(price * price_factor, volume * volume_factor, dated=True))
    assert scaled.chosen.tolist() == base.chosen.tolist()
    assert scaled.available.tolist() == base.available.tolist()
    ok = base.available
    np.testing.assert_allclose(scaled.cv_mse[ok], base.cv_mse[ok] * volume_factor ** 2, rtol=1e-6)
    np.testing.assert_allclose(scaled.q2[ok], base.q2[ok], rtol=1e-6, atol=1e-9)


DEGENERATE = st.one_of(
    st.builds(lambda v: ([3.0], [v]), st.floats(0, 1e6)),                                     # one point
    st.builds(lambda n, v: ([2.5] * n, list(v[:n]) + [1.0] * (n - len(v[:n]))),                # one price
              st.integers(2, 30), st.lists(st.floats(0, 1e4), max_size=30)),
    st.builds(lambda n: ([1.0, 2.0] * n, list(range(2 * n))), st.integers(1, 15)),              # two prices
    st.builds(lambda n, s: ([s * (1 + i) for i in range(n)], [s * 10 for _ in range(n)]),      # huge / tiny
              st.integers(1, 20), st.sampled_from([1e9, 1e-9])),
    st.builds(lambda n: ([1.0 + 1e-12 * i for i in range(n)], [5.0 + i for i in range(n)]),    # near-flat
              st.integers(2, 20)),
)


@given(DEGENERATE, st.sampled_from([2, 5, "loo"]))
@hsettings(max_examples=120, deadline=None)
def test_degenerate_series_never_raise_and_say_why(series, folds):
    price, volume = series
    results = fitcore.fit_batch(one_series(price, volume), fitcore.FitSettings(folds=folds))
    distinct = len(np.unique(price))
    for c, cand in enumerate(results.candidates):
        if cand.family == "poly" and cand.complexity > distinct:
            assert not results.available[0, c]
        if not results.available[0, c]:
            text = results.reason_text(0, c)
            assert text and any(ch.isdigit() for ch in text) or "price" in text
    chosen = results.chosen[0]
    if chosen >= 0:
        assert results.available[0, chosen]
        assert np.isfinite(results.cv_mse[0, chosen])
    else:
        assert not results.available[0].any()


def test_a_degenerate_series_does_not_disturb_its_neighbours():
    rng = np.random.default_rng(5)
    good_price = rng.uniform(1, 3, 40)
    good_volume = 100 - 20 * good_price + rng.normal(0, 1, 40)
    alone = fitcore.fit_batch(one_series(good_price, good_volume))
    keys = np.array(["bad"] * 3 + ["p"] * 40, dtype=object)  # 3 rows: fewer than 5 folds
    mixed = fitcore.fit_batch(fitcore.from_columns({"product": keys}, np.r_[[2.0] * 3, good_price],
                                                   np.r_[[0.0] * 3, good_volume]))
    assert mixed.chosen[0] == -1 and not mixed.available[0].any()
    ok = alone.available[0]
    np.testing.assert_array_equal(mixed.available[1], ok)
    np.testing.assert_allclose(mixed.cv_mse[1][ok], alone.cv_mse[0][ok], rtol=1e-12)
