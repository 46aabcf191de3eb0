"""Weighted least squares checked against statsmodels WLS, and integer weights against repeated rows.

Reference: statsmodels ``WLS(...).fit().params`` and ``get_prediction`` (intervals are
also checked in ``test_prediction_reference.py``).
"""
from __future__ import annotations

import numpy as np
import statsmodels.api as sm

import fitcore
from tests.conftest import random_dataset, series_arrays


def test_weighted_coefficients_match_statsmodels_wls():
    data = random_dataset(51, n_series=50, with_weight=True)
    results = fitcore.fit_batch(data)
    checked = 0
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        w = data.weight[data.offsets[s]:data.offsets[s + 1]]
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                continue
            if cand.family == "poly":
                mid, half = (x.min() + x.max()) / 2, (x.max() - x.min()) / 2
                fit = sm.WLS(y, np.vander((x - mid) / half, cand.degree + 1, increasing=True), weights=w).fit()
                np.testing.assert_allclose(results.coef[s, c, :cand.degree + 1], fit.params, rtol=1e-8, atol=1e-8 * np.abs(y).max())
                # σ² of a row of the series' average weight (the planned week's: ``fit.weights``)
                np.testing.assert_allclose(results.sigma2[s, c], fit.scale / np.mean(w[w > 0]), rtol=1e-8)
            else:
                fit = sm.WLS(np.log(y), sm.add_constant(np.log(x)), weights=w).fit()
                np.testing.assert_allclose(results.power_coef(s, c), fit.params, rtol=1e-8)
            checked += 1
    assert checked > 200


def test_integer_weights_equal_repeated_rows():
    rng = np.random.default_rng(52)
    n = 40
    price = np.round(rng.uniform(1, 3, n), 2)
    volume = 200 - 40 * price + rng.normal(0, 3, n)
    weight = rng.integers(1, 4, n).astype(float)
    keys = {"product": np.array(["p"] * n, dtype=object)}
    weighted = fitcore.fit_batch(fitcore.from_columns(keys, price, volume, weight=weight),
                                 fitcore.FitSettings(folds="loo"), plan_price=2.0)
    repeat = weight.astype(int)
    expanded = fitcore.fit_batch(fitcore.from_columns({"product": np.array(["p"] * repeat.sum(), dtype=object)},
                                                      np.repeat(price, repeat), np.repeat(volume, repeat)),
                                 fitcore.FitSettings(folds="loo"), plan_price=2.0)
    ok = weighted.available[0] & expanded.available[0]
    assert ok.sum() >= 5
    np.testing.assert_allclose(weighted.coef[0][ok], expanded.coef[0][ok], rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(weighted.plan_volume[0][ok], expanded.plan_volume[0][ok], rtol=1e-9)
    np.testing.assert_allclose(weighted.r2[0][ok], expanded.r2[0][ok], rtol=1e-9)
