"""The semi-log family (ln volume = a + b·price) checked against outside references.

References: statsmodels ``OLS``/``WLS`` on (1, price) → ln volume for the
coefficients, ``get_prediction(...).summary_frame(alpha=0.05)`` for the
log-scale prediction interval (exponentiated), ``get_influence()`` for
leverage and Cook's distance; Duan's smearing estimate (Duan 1983, J. Am.
Stat. Assoc. 78:605–610: the mean of exp(residual)); brute-force refits
(numpy ``lstsq``) on every training set for the cross-validation errors, the
same refits that check the log-log candidate (``test_crossval_reference.py``).  The
revenue-best price −1/b of price·exp(a + b·price) is calculus (common practice).
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from fitcore.review.influence import series_influence
from tests.conftest import random_dataset, series_arrays, series_folds
from tests.fitcore.test_crossval_reference import refit_log_line_folds, refit_log_line_loo


def semilog_data(seed: int, n_series: int = 40, with_weight: bool = False, with_date: bool = False):
    """Series with exponential demand: volume = A·exp(b·price)·noise (invented, for the comparisons)."""
    rng = np.random.default_rng(seed)
    counts = rng.integers(10, 40, n_series)
    total = int(counts.sum())
    base = np.repeat(rng.uniform(1, 30, n_series), counts)
    price = np.round(base * rng.uniform(0.6, 1.4, total), 2)
    b = np.repeat(-rng.uniform(0.5, 3.0, n_series), counts) / base
    volume = np.repeat(rng.uniform(50, 5000, n_series), counts) * np.exp(b * price) * rng.lognormal(0, 0.2, total)
    keys = {"product": np.repeat(np.array([f"item {i:03d}" for i in range(n_series)], dtype=object), counts)}
    weight = rng.uniform(0.3, 3.0, total) if with_weight else None
    date = None
    if with_date:
        date = np.concatenate([np.datetime64("2024-01-01") + rng.permutation(c).astype("timedelta64[D]") for c in counts])
    return fitcore.from_columns(keys, price, volume, weight=weight, date=date)


def semilog_settings(**keywords):
    return fitcore.FitSettings(degrees=(1,), semilog=True, **keywords)


@pytest.mark.parametrize("weighted", [False, True])
def test_coefficients_interval_and_elasticity_match_statsmodels(weighted):
    data = semilog_data(1, with_weight=weighted)
    plan = np.array([np.median(series_arrays(data, s)[0]) * 1.1 for s in range(data.n_series)])
    results = fitcore.fit_batch(data, semilog_settings(), plan_price=plan)
    c = results.names.index("semilog")
    assert results.candidates[c].family == "semilog" and results.candidates[c].complexity == 2
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        w = np.ones_like(x) if data.weight is None else data.weight[data.offsets[s]:data.offsets[s + 1]]
        fit = sm.WLS(np.log(y), sm.add_constant(x), weights=w).fit()
        unit = np.mean(w[w > 0])  # the planned week weighs as the average row of positive weight
        frame = fit.get_prediction(np.array([[1.0, plan[s]]]), weights=unit).summary_frame(alpha=0.05)
        smear = np.average(np.exp(fit.resid), weights=w)  # Duan's smearing estimate (weighted mean)
        np.testing.assert_allclose(results.power_coef(s, c), fit.params, rtol=1e-8)
        np.testing.assert_allclose(results.smear[s, c], smear, rtol=1e-10)
        np.testing.assert_allclose(results.plan_volume[s, c], np.exp(frame["mean"].iloc[0]) * smear, rtol=1e-8)
        np.testing.assert_allclose(results.plan_lo[s, c], np.exp(frame["obs_ci_lower"].iloc[0]), rtol=1e-8)
        np.testing.assert_allclose(results.plan_hi[s, c], np.exp(frame["obs_ci_upper"].iloc[0]), rtol=1e-8)
        np.testing.assert_allclose(results.plan_elasticity[s, c], fit.params[1] * plan[s], rtol=1e-8)
        np.testing.assert_allclose(results.sigma2[s, c], fit.scale / unit, rtol=1e-8)


@pytest.mark.parametrize("order, weighted", [("given", False), ("shuffled", False), ("shuffled", True),
                                             ("time", True)])
def test_fold_errors_match_refitting_each_fold(order, weighted):
    data = semilog_data(2, n_series=60, with_weight=weighted, with_date=True)
    settings = semilog_settings(folds=4, fold_order=order)
    results = fitcore.fit_batch(data, settings)
    c = results.names.index("semilog")
    checked = 0
    for s in range(data.n_series):
        if not results.available[s, c]:
            continue
        x, y, w, splits = series_folds(data, settings, s)
        per_fold = refit_log_line_folds(x, y, w, splits)
        np.testing.assert_allclose(results.folds_of(s)[:, c], per_fold, rtol=1e-9)
        np.testing.assert_allclose(results.cv_mse[s, c], per_fold.mean(), rtol=1e-9)
        checked += 1
    assert checked >= 50


def test_leave_one_out_errors_are_exact_refits():
    """Each row's error: an exact refit without it, smeared by that refit's own training rows."""
    data = semilog_data(3, n_series=25)
    results = fitcore.fit_batch(data, semilog_settings(folds="loo"))
    c = results.names.index("semilog")
    for s in range(data.n_series):
        x, y = series_arrays(data, s)
        errors = refit_log_line_loo(x, y)
        np.testing.assert_allclose(results.folds_of(s)[:, c], errors, rtol=1e-9)
        np.testing.assert_allclose(results.cv_mse[s, c], np.mean(errors), rtol=1e-9)


def test_leverage_and_cook_match_statsmodels_on_the_log_scale():
    data = semilog_data(4, n_series=30)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(0,), loglog=False, semilog=True))
    checked = 0
    for s in range(data.n_series):
        if results.names[results.chosen[s]] != "semilog":
            continue
        x, y = series_arrays(data, s)
        influence = sm.OLS(np.log(y), sm.add_constant(x)).fit().get_influence()
        leverage, cook = series_influence(results, s)
        np.testing.assert_allclose(leverage, influence.hat_matrix_diag, rtol=1e-8)
        np.testing.assert_allclose(cook, influence.cooks_distance[0], rtol=1e-8)
        assert results.top_cook[s] == pytest.approx(influence.cooks_distance[0].max(), rel=1e-8)
        checked += 1
    assert checked >= 20


def test_revenue_peaks_at_minus_one_over_b_within_the_observed_range():
    data = semilog_data(5, n_series=40)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(0,), loglog=False, semilog=True))
    c = results.names.index("semilog")
    inside = 0
    for s in np.flatnonzero(results.chosen == c):
        a, b = results.power_coef(s, c)
        lo, hi = results.price_lo[s], results.price_hi[s]
        grid = np.linspace(lo, hi, 20001)
        best = grid[np.argmax(grid * np.exp(a + b * grid))]
        assert abs(results.revenue_price[s] - best) <= (hi - lo) / 20000
        inside += lo < -1 / b < hi
        if lo < -1 / b < hi:
            np.testing.assert_allclose(results.revenue_price[s], -1 / b, rtol=1e-12)
    assert inside >= 5


def test_semilog_needs_positive_volumes_but_not_positive_prices():
    price = np.array([0.0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11] * 2)
    volume = np.concatenate([100 * np.exp(-0.1 * price[:12]), 100 * np.exp(-0.1 * price[12:])])
    volume[20] = 0.0  # the second series sold nothing once
    keys = {"product": np.array(["free sample"] * 12 + ["a zero week"] * 12, dtype=object)}
    results = fitcore.fit_batch(fitcore.from_columns(keys, price, volume), semilog_settings())
    semilog, loglog = results.names.index("semilog"), results.names.index("loglog")
    first = 0 if results.data.key_of(0)["product"] == "free sample" else 1
    assert results.available[first, semilog] and not results.available[first, loglog]
    assert not results.available[1 - first, semilog]
    assert results.reason_text(1 - first, semilog) == "a semi-log curve needs every volume above zero"
    assert results.reason_text(first, loglog) == "a log-log curve needs every price and volume above zero"


@pytest.mark.parametrize("folds", [5, "loo"])
def test_switching_semilog_on_leaves_every_other_candidate_as_it_was(folds):
    data = random_dataset(9, n_series=80)
    plan = data.price[data.offsets[:-1]] * 1.05
    without = fitcore.fit_batch(data, fitcore.FitSettings(folds=folds), plan_price=plan)
    with_it = fitcore.fit_batch(data, fitcore.FitSettings(folds=folds, semilog=True), plan_price=plan)
    assert with_it.names == without.names + ["semilog"]
    n_c = len(without.names)
    for name in ("available", "cv_mse", "cv_se", "q2", "r2", "plan_volume", "plan_lo", "plan_hi", "smear",
                 "basis_mid", "basis_half", "sigma2"):
        np.testing.assert_array_equal(getattr(with_it, name)[:, :n_c], getattr(without, name), err_msg=name)
    np.testing.assert_array_equal(with_it.coef[:, :n_c], without.coef)
    np.testing.assert_array_equal(with_it.fold_err[:, :n_c], without.fold_err)
    assert with_it.available[:, n_c].sum() > 70
