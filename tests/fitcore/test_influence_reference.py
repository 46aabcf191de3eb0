"""Leverage and Cook's distance checked against statsmodels ``OLSInfluence``.

Reference: statsmodels ``OLSResults.get_influence()``: ``hat_matrix_diag`` and
``cooks_distance[0]``.
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from fitcore.review.influence import series_influence
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
        leverage, cook = series_influence(results, s)
        np.testing.assert_allclose(leverage, influence.hat_matrix_diag, rtol=1e-8)
        np.testing.assert_allclose(cook, influence.cooks_distance[0], rtol=1e-8)
        # The engine keeps only the largest distance and its row, from its own (Cholesky) computation.
        assert results.top_cook[s] == pytest.approx(influence.cooks_distance[0].max(), rel=1e-8)
        assert results.top_row[s] == data.offsets[s] + int(np.argmax(influence.cooks_distance[0]))
        checked[cand.family] += 1
    assert checked["poly"] >= 10 and checked["loglog"] >= 10, checked
