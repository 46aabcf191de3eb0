"""Plan-price predictions checked against statsmodels and textbook demand facts.

Reference: statsmodels ``OLS``/``WLS`` ``get_prediction(...).summary_frame(alpha=0.05)``
(``obs_ci_lower``/``obs_ci_upper``: the t-interval for a new observation).
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from tests.conftest import random_dataset, series_arrays


def reference_interval(x, y, degree, at, w=None):
    """statsmodels' interval for a new observation; weighted, one weighing as the series' average row of
    positive weight (``get_prediction(weights=…)``: "Weights interpreted as in WLS, used for the variance of
    the predicted residual", statsmodels/regression/_prediction.py, ``var_resid /= weights``)."""
    mid, half = (x.min() + x.max()) / 2, (x.max() - x.min()) / 2
    design = lambda v: np.vander((np.atleast_1d(v) - mid) / half, degree + 1, increasing=True)  # noqa: E731
    model = sm.OLS(y, design(x)) if w is None else sm.WLS(y, design(x), weights=w)
    new_weight = None if w is None else np.mean(w[w > 0])
    frame = model.fit().get_prediction(design(at), weights=new_weight).summary_frame(alpha=0.05)
    return frame["mean"].iloc[0], frame["obs_ci_lower"].iloc[0], frame["obs_ci_upper"].iloc[0]


@pytest.mark.parametrize("weighted", [False, True])
def test_polynomial_intervals_match_statsmodels(weighted):
    data = random_dataset(21, n_series=60, with_weight=weighted)
    rng = np.random.default_rng(0)
    plan = np.array([rng.uniform(*np.percentile(series_arrays(data, s)[0], [10, 90])) for s in range(data.n_series)])
    results = fitcore.fit_batch(data, fitcore.FitSettings(loglog=False), plan_price=plan)
    checked = 0
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        w = None if data.weight is None else data.weight[data.offsets[s]:data.offsets[s + 1]]
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                continue
            mean, lo, hi = reference_interval(x, y, cand.degree, plan[s], w)
            np.testing.assert_allclose([results.plan_volume[s, c], results.plan_lo[s, c], results.plan_hi[s, c]],
                                       [mean, lo, hi], rtol=1e-8)
            checked += 1
    assert checked > 300


def test_loglog_interval_matches_statsmodels_on_the_log_scale():
    data = random_dataset(22, n_series=40)
    plan = np.array([np.median(series_arrays(data, s)[0]) for s in range(data.n_series)])
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,)), plan_price=plan)
    c = results.names.index("loglog")
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        design = sm.add_constant(np.log(x))
        fit = sm.OLS(np.log(y), design).fit()
        frame = fit.get_prediction(np.array([[1.0, np.log(plan[s])]])).summary_frame(alpha=0.05)
        smear = np.mean(np.exp(fit.resid))  # Duan's smearing estimate
        np.testing.assert_allclose(results.plan_volume[s, c], np.exp(frame["mean"].iloc[0]) * smear, rtol=1e-8)
        np.testing.assert_allclose(results.plan_lo[s, c], np.exp(frame["obs_ci_lower"].iloc[0]), rtol=1e-8)
        np.testing.assert_allclose(results.plan_hi[s, c], np.exp(frame["obs_ci_upper"].iloc[0]), rtol=1e-8)
        np.testing.assert_allclose(results.plan_elasticity[s, c], fit.params[1], rtol=1e-8)
        np.testing.assert_allclose(results.power_coef(s, c), fit.params, rtol=1e-8)


def linear_demand(a=1000.0, b=40.0, n=40, seed=0):
    """Q = a − b·P at prices spread over [5, 20]: exactly linear demand."""
    price = np.round(np.random.default_rng(seed).uniform(5, 20, n), 2)
    return fitcore.from_columns({"product": np.array(["linear"] * n, dtype=object)}, price, a - b * price)


def test_linear_demand_elasticity_is_minus_b_p_over_q():
    # Textbook fact: for Q = a − bP, dQ/dP·P/Q = −bP/Q (e.g. any intermediate microeconomics text).
    a, b, p = 1000.0, 40.0, 9.0
    results = fitcore.fit_batch(linear_demand(a, b), plan_price=p)
    assert results.names[results.chosen[0]] == "poly1"
    c = results.chosen[0]
    np.testing.assert_allclose(results.plan_volume[0, c], a - b * p, rtol=1e-10)
    np.testing.assert_allclose(results.plan_elasticity[0, c], -b * p / (a - b * p), rtol=1e-9)
    np.testing.assert_allclose(results.power_coef(0, c), [a, -b], rtol=1e-10)


def test_linear_demand_revenue_peaks_at_a_over_2b_where_demand_is_unit_elastic():
    # Textbook fact: revenue P·(a − bP) peaks at P = a/2b, where elasticity is −1.
    a, b = 1000.0, 40.0
    results = fitcore.fit_batch(linear_demand(a, b), plan_price=a / (2 * b))
    c = results.chosen[0]
    np.testing.assert_allclose(results.revenue_price[0], a / (2 * b), rtol=1e-10)
    np.testing.assert_allclose(results.plan_elasticity[0, c], -1.0, rtol=1e-9)


def test_revenue_price_stays_inside_the_observed_range():
    # Peak a/2b = 25 lies above the observed prices [5, 20]: the best observed price is the top one.
    results = fitcore.fit_batch(linear_demand(2000.0, 40.0))
    np.testing.assert_allclose(results.revenue_price[0], results.price_hi[0])
