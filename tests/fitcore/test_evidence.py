"""Chart evidence: the single-series band agrees with the batch engine's intervals.

The batch intervals are themselves checked against statsmodels in
``test_prediction_reference.py``; here the band computed by a refit of one
series must reproduce them at the plan price, for every family.  The unscaled
covariance a signed curve carries is checked against statsmodels
``WLS(...).fit().normalized_cov_params`` ((XᵀWX)⁻¹) in the same basis.
"""
from __future__ import annotations

import numpy as np
import statsmodels.api as sm

import fitcore
from fitcore.review.evidence import band, basis_of, covariance, curve, runner_up
from tests.conftest import random_dataset, series_arrays


def test_band_and_curve_match_the_batch_plan_prediction():
    data = random_dataset(41, n_series=40, with_weight=True)
    plan = np.array([np.median(series_arrays(data, s)[0]) for s in range(data.n_series)])
    results = fitcore.fit_batch(data, fitcore.FitSettings(semilog=True), plan_price=plan)
    checked = 0
    for s in range(data.n_series):
        for c in np.flatnonzero(results.available[s]):
            lo, hi = band(results, s, c, plan[s:s + 1])
            np.testing.assert_allclose(curve(results, s, c, plan[s:s + 1]), results.plan_volume[s, c], rtol=1e-9)
            np.testing.assert_allclose([lo[0], hi[0]], [results.plan_lo[s, c], results.plan_hi[s, c]], rtol=1e-8)
            checked += 1
    assert checked > 150 and results.available[:, -1].sum() > 30  # the last candidate: semilog


def test_covariance_in_the_basis_matches_statsmodels():
    data = random_dataset(43, n_series=15, with_weight=True)
    results = fitcore.fit_batch(data, fitcore.FitSettings(semilog=True))
    checked = 0
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        for c in np.flatnonzero(results.available[s]):
            family, coef, mid, half, _ = basis_of(results, s, c)
            design = np.vander(family.coordinate(data.price[rows], mid, half), len(coef), increasing=True)
            w = data.weight[rows]
            fit = sm.WLS(family.response(data.volume[rows]), design, weights=w).fit()
            # (XᵀWX)⁻¹ of the weights over their mean, the planned week's weight (``fitcore.fit.weights``)
            np.testing.assert_allclose(covariance(results, s, c), fit.normalized_cov_params * np.mean(w[w > 0]),
                                       rtol=1e-7, atol=1e-12)
            np.testing.assert_allclose(coef, fit.params, rtol=1e-7, atol=1e-9 * np.abs(fit.params).max())
            checked += 1
    assert checked > 80


def test_runner_up_is_the_best_other_candidate():
    data = random_dataset(42, n_series=10)
    results = fitcore.fit_batch(data)
    for s in range(data.n_series):
        r = runner_up(results, s)
        others = [c for c in range(len(results.candidates)) if results.available[s, c] and c != results.chosen[s]]
        assert r == min(others, key=lambda c: results.cv_mse[s, c])
