"""Leverage and Cook's distance checked against statsmodels ``OLSInfluence``.

Reference: statsmodels ``OLSResults.get_influence()``: ``hat_matrix_diag`` and
``cooks_distance[0]``.
"""
from __future__ import annotations

import numpy as np
import statsmodels.api as sm

import fitcore
from tests.conftest import random_dataset, series_arrays


def test_cook_and_leverage_match_statsmodels_for_the_chosen_curve():
    data = random_dataset(31, n_series=80)
    results = fitcore.fit_batch(data)
    checked = {"poly": 0, "loglog": 0}
    for s in range(data.n_series):
        c = results.chosen[s]
        if c < 0:
            continue
        cand = results.candidates[c]
        x, y = series_arrays(data, s)
        if cand.family == "poly":
            t = (x - results.mid[s]) / results.half[s]
            fit = sm.OLS(y, np.vander(t, cand.degree + 1, increasing=True)).fit()
        else:
            fit = sm.OLS(np.log(y), sm.add_constant(np.log(x))).fit()
        influence = fit.get_influence()
        rows = slice(data.offsets[s], data.offsets[s + 1])
        np.testing.assert_allclose(results.leverage[rows], influence.hat_matrix_diag, rtol=1e-8)
        np.testing.assert_allclose(results.cook[rows], influence.cooks_distance[0], rtol=1e-8)
        checked[cand.family] += 1
    assert checked["poly"] >= 10 and checked["loglog"] >= 10, checked
