"""Fits with controls checked against outside references.

References: statsmodels ``OLS``/``WLS`` on the same design (intercept, the
price terms, the controls) for the coefficients, σ², and
``get_prediction(...).summary_frame(alpha=0.05)`` for the plan-price prediction
and its 95% interval (for the log families built on ln volume and
exponentiated, smeared by Duan's estimate: Duan 1983, J. Am. Stat. Assoc.
78:605–610); numpy ``lstsq`` refits of every training set for the k-fold,
time-ordered and leave-one-out errors (``controls_support.refit_held_out``).
The elasticity at the plan price is calculus: dV/dP·P/V of the fitted curve
with the controls held (common practice).
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from fitcore.fit.controls import season_terms
from tests.conftest import series_folds
from tests.fitcore.controls_support import control_rows, controlled_data, kept_columns, price_terms, refit_held_out

SETTINGS = dict(degrees=(0, 1, 2, 3), semilog=True, season=1)


def plan_for(data):
    """A plan price per series, a planned promotion on every third series, a plan date on every other."""
    n = data.n_series
    price = np.array([np.median(data.price[data.offsets[s]:data.offsets[s + 1]]) * 1.05 for s in range(n)])
    promo = np.where(np.arange(n) % 3 == 0, 1.0, np.nan)
    date = np.where(np.arange(n) % 2 == 0, np.datetime64("2024-07-15", "ns"), np.datetime64("NaT", "ns"))
    return dict(plan_price=price, plan_controls={"promo": promo}, plan_date=date)


def plan_terms(data, s, plan, w):
    """The plan's value of each control term of series ``s``, by the README's defaults."""
    promo = plan["plan_controls"]["promo"][s]
    rival = np.average(data.controls["rival"][data.offsets[s]:data.offsets[s + 1]], weights=w)
    date = plan["plan_date"][s]
    season = season_terms(np.array([date]), 1)[:, 0] if not np.isnat(date) else np.zeros(2)
    return np.array([0.0 if np.isnan(promo) else promo, rival, *season])


@pytest.mark.parametrize("weighted", [False, True])
def test_every_family_matches_statsmodels_at_the_plan_controls(weighted):
    data = controlled_data(1, weighted=weighted, awkward=False)
    plan = plan_for(data)
    results = fitcore.fit_batch(data, fitcore.FitSettings(**SETTINGS), **plan)
    ctl = results.controls
    assert ctl.names == ("promo", "rival", "season_sin1", "season_cos1") and ctl.binary == (True, False, False, False)
    checked = 0
    for s in range(data.n_series):
        rows = slice(data.offsets[s], data.offsets[s + 1])
        price, volume = data.price[rows], data.volume[rows]
        w = np.ones_like(price) if data.weight is None else data.weight[rows]
        controls = control_rows(data, s, 1)
        held = plan_terms(data, s, plan, w)
        np.testing.assert_allclose(ctl.plan[s], held, rtol=1e-12, atol=1e-12)
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                continue
            logged = cand.family != "poly"
            terms = price_terms(price, cand.family, cand.degree)
            fit = sm.WLS(np.log(volume) if logged else volume,
                         np.column_stack([np.ones(len(price)), terms, controls]), weights=w).fit()
            at = plan["plan_price"][s]
            point = np.concatenate(([1.0], price_terms(np.array([at]), cand.family, cand.degree)[0], held))
            unit = np.mean(w[w > 0])  # the planned week weighs as the average row of positive weight
            frame = fit.get_prediction(point[None], weights=unit).summary_frame(alpha=0.05)
            size = cand.complexity
            np.testing.assert_allclose(results.power_coef(s, c), fit.params[:size], rtol=1e-7,
                                       atol=1e-9 * np.abs(fit.params[:size]).max())
            np.testing.assert_allclose(ctl.coef[s, c], fit.params[size:], rtol=1e-7, atol=1e-10)
            np.testing.assert_allclose(results.sigma2[s, c], fit.scale / unit, rtol=1e-8)
            if logged:
                smear = np.average(np.exp(fit.resid), weights=w)  # Duan's smearing estimate
                np.testing.assert_allclose(results.smear[s, c], smear, rtol=1e-10)
                mean, lo, hi = np.exp(frame["mean"].iloc[0]) * smear, *np.exp(frame[["obs_ci_lower", "obs_ci_upper"]].iloc[0])
                slope_ln = fit.params[1] * (1 if cand.family == "loglog" else at)  # d ln V / d ln P
            else:
                mean, lo, hi = frame[["mean", "obs_ci_lower", "obs_ci_upper"]].iloc[0]
                slope_ln = sum(k * fit.params[k] * at ** k for k in range(1, size)) / mean
            np.testing.assert_allclose(results.plan_volume[s, c], mean, rtol=1e-8)
            np.testing.assert_allclose([results.plan_lo[s, c], results.plan_hi[s, c]], [lo, hi], rtol=1e-8)
            np.testing.assert_allclose(results.plan_elasticity[s, c], slope_ln, rtol=1e-7)
            checked += 1
    assert checked >= 5 * data.n_series


@pytest.mark.parametrize("order, folds, weighted", [("given", 4, False), ("shuffled", 5, True), ("time", 4, True),
                                                    ("shuffled", "loo", False), ("shuffled", "loo", True)])
def test_held_out_errors_match_refitting_every_training_set(order, folds, weighted):
    """Series 0 has one promotion week (its lone row), series 1 promotes every week, series 2's competitor
    price never moves: controls constant in a series or in a fold's training rows are left out there."""
    data = controlled_data(2, n_series=24, weighted=weighted)
    settings = fitcore.FitSettings(degrees=(0, 1, 2), semilog=True, season=1, folds=folds, fold_order=order)
    results = fitcore.fit_batch(data, settings)
    loo = folds == "loo"
    checked = 0
    for s in range(data.n_series):
        price, volume, w, splits = series_folds(data, settings, s)
        controls = control_rows(data, s, 1)
        for c, cand in enumerate(results.candidates):
            if not results.available[s, c]:
                continue
            expected = refit_held_out(price, volume, w, controls, splits, cand.family, cand.degree, loo=loo)
            np.testing.assert_allclose(results.folds_of(s)[:, c], expected, rtol=1e-7, atol=1e-9,
                                       err_msg=f"series {s}, {cand.name}")
            checked += 1
    assert results.available[:3].all() or not loo  # lone rows and constant controls leave every candidate usable
    assert checked >= 4 * data.n_series


def test_controls_constant_in_a_series_are_left_out_with_the_reason():
    data = controlled_data(3, n_series=6)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,), loglog=False))
    ctl = results.controls
    assert ctl.left_out[1].tolist() == [1, 0] and ctl.left_out[2].tolist() == [0, 1]  # promo; rival
    assert not ctl.left_out[[0, 3, 4, 5]].any()
    assert ctl.coef[1, 0, 0] == 0 and ctl.coef[2, 0, 1] == 0
    # The fit is the fit without that control: same as a dataset without the column (same key, same dates: same
    # folds).
    rows = slice(data.offsets[1], data.offsets[2])
    alone = fitcore.from_columns({"product": np.array([data.keys["product"][1]] * int(data.counts[1]), dtype=object)},
                                 data.price[rows], data.volume[rows], date=data.date[rows],
                                 controls={"rival": data.controls["rival"][rows]})
    np.testing.assert_allclose(fitcore.fit_batch(alone, fitcore.FitSettings(degrees=(1,), loglog=False)).cv_mse[0],
                               results.cv_mse[1], rtol=1e-9)


def test_a_control_tied_to_price_raises_price_tied_with_statsmodels_variance_inflation():
    """Variance inflation of price given the controls, as statsmodels' ``variance_inflation_factor`` on
    [1, price, controls]; above ``price_tied_vif`` (10) the warn flag says the effects cannot be told apart."""
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    from fitcore.review.flags import diagnose
    rng = np.random.default_rng(4)
    n = 60
    price = np.round(rng.uniform(2, 4, 2 * n), 2)
    tied = price[:n] * 2 + rng.normal(0, 0.15, n)  # series A: moves with price; series B: does not
    loose = rng.uniform(4, 8, n)
    volume = 500 - 60 * price + rng.normal(0, 5, 2 * n)
    data = fitcore.from_columns({"product": np.repeat(np.array(["A", "B"], dtype=object), n)}, price, volume,
                                controls={"display": np.concatenate([tied, loose])})
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,)))
    diagnosis = diagnose(results)
    for s in range(2):
        rows = slice(s * n, (s + 1) * n)
        exog = np.column_stack([np.ones(n), price[rows], data.controls["display"][rows]])
        np.testing.assert_allclose(results.controls.vif[s], variance_inflation_factor(exog, 1), rtol=1e-9)
    assert diagnosis.flagged("price-tied").tolist() == [True, False]
    message = diagnosis.flags_of(0)[-1]["message"]
    assert "display" in message and "cannot be told apart" in message and f"{results.controls.vif[0]:.1f}" in message


def test_a_control_that_is_price_itself_makes_price_terms_unavailable_with_the_reason():
    rng = np.random.default_rng(5)
    price = np.round(rng.uniform(1, 3, 40), 2)
    volume = 100 - 20 * price + rng.normal(0, 2, 40)
    data = fitcore.from_columns({"product": np.array(["x"] * 40, dtype=object)}, price, volume,
                                controls={"shelf_price": 1.1 * price + 0.05})
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(0, 1, 2), loglog=False))
    assert results.available[0].tolist() == [True, False, False]
    assert "cannot be told apart" in results.reason_text(0, 1)


def test_no_controls_leaves_results_without_control_fields():
    data = controlled_data(6, n_series=5, awkward=False)
    plain = fitcore.from_columns({"product": np.repeat(data.keys["product"], data.counts)}, data.price, data.volume)
    results = fitcore.fit_batch(plain)
    assert results.controls is None
    with pytest.raises(fitcore.SettingsError, match="--season needs the date column"):
        fitcore.fit_batch(plain, fitcore.FitSettings(season=1))


def test_kept_columns_helper_can_fail():
    """The reference's own rule: a constant column and a combination of earlier ones are left out."""
    z = np.column_stack([np.ones(10) * 3, np.arange(10.0), 2 * np.arange(10.0) + 1, np.arange(10.0) ** 2])
    assert kept_columns(z, np.ones(10)) == [1, 3]
