"""Chart evidence: the single-series band agrees with the batch engine's intervals.

The batch intervals are themselves checked against statsmodels in
``test_prediction_reference.py``; here the band computed by a QR refit of one
series must reproduce them at the plan price.
"""
from __future__ import annotations

import numpy as np

import fitcore
from fitcore.review.evidence import band, curve, runner_up
from tests.conftest import random_dataset, series_arrays


def test_band_and_curve_match_the_batch_plan_prediction():
    data = random_dataset(41, n_series=40, with_weight=True)
    plan = np.array([np.median(series_arrays(data, s)[0]) for s in range(data.n_series)])
    results = fitcore.fit_batch(data, plan_price=plan)
    checked = 0
    for s in range(data.n_series):
        for c in np.flatnonzero(results.available[s]):
            lo, hi = band(results, s, c, plan[s:s + 1])
            np.testing.assert_allclose(curve(results, s, c, plan[s:s + 1]), results.plan_volume[s, c], rtol=1e-9)
            np.testing.assert_allclose([lo[0], hi[0]], [results.plan_lo[s, c], results.plan_hi[s, c]], rtol=1e-8)
            checked += 1
    assert checked > 150


def test_runner_up_is_the_best_other_candidate():
    data = random_dataset(42, n_series=10)
    results = fitcore.fit_batch(data)
    for s in range(data.n_series):
        r = runner_up(results, s)
        others = [c for c in range(len(results.candidates)) if results.available[s, c] and c != results.chosen[s]]
        assert r == min(others, key=lambda c: results.cv_mse[s, c])
