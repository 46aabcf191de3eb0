"""Controls on real data shipped in a PyPI package (statsmodels' bundled datasets), against statsmodels.

- The world copper market 1951–1975 (``statsmodels.datasets.copper``; source: J. Gill, *Generalized Linear
  Models: A Unified Approach*): consumption against the copper price, with real per-capita income and the
  price of aluminium (a substitute) as controls.
- The RAND Health Insurance Experiment (``statsmodels.datasets.randhie``; source: Cameron & Trivedi 2005,
  *Microeconometrics*, from the RAND HIE): outpatient visits against the coinsurance rate (the share of the
  cost the patient pays: a price of care), in four series by self-rated health, with the individual-deductible
  plan (0/1) and the log participation-incentive payment as controls.

Each check: pricefold's coefficients and plan prediction against statsmodels OLS on the same design, and its
held-out errors against numpy refits.  That a control changes the price effect is a fact of these data.
"""
from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import fitcore
from tests.conftest import series_folds
from tests.fitcore.controls_support import control_rows, refit_held_out


@pytest.fixture(scope="module")
def copper():
    from statsmodels.datasets import copper
    frame = copper.load_pandas().data
    return fitcore.from_columns({"market": np.array(["world"] * len(frame), dtype=object)},
                                frame["COPPERPRICE"].to_numpy(), frame["WORLDCONSUMPTION"].to_numpy(),
                                controls={"income": frame["INCOMEINDEX"].to_numpy(),
                                          "aluminium": frame["ALUMPRICE"].to_numpy()})


def test_copper_consumption_with_income_and_aluminium_held(copper):
    settings = fitcore.FitSettings(degrees=(1,), folds="loo")
    plan = 40.0
    results = fitcore.fit_batch(copper, settings, plan_price=plan)
    income, aluminium = copper.controls["income"], copper.controls["aluminium"]
    for c, logged in ((0, False), (1, True)):  # poly1, loglog
        y = np.log(copper.volume) if logged else copper.volume
        x = np.log(copper.price) if logged else copper.price
        fit = sm.OLS(y, np.column_stack([np.ones(25), x, income, aluminium])).fit()
        np.testing.assert_allclose(results.power_coef(0, c), fit.params[:2], rtol=1e-8)
        np.testing.assert_allclose(results.controls.coef[0, c], fit.params[2:], rtol=1e-8)
        point = [1.0, np.log(plan) if logged else plan, income.mean(), aluminium.mean()]  # numeric: series means
        frame = fit.get_prediction(np.array([point])).summary_frame(alpha=0.05)
        lo, hi = frame["obs_ci_lower"].iloc[0], frame["obs_ci_upper"].iloc[0]
        np.testing.assert_allclose([results.plan_lo[0, c], results.plan_hi[0, c]],
                                   np.exp([lo, hi]) if logged else [lo, hi], rtol=1e-8)
    price, volume, w, splits = series_folds(copper, settings, 0)
    expected = refit_held_out(price, volume, w, control_rows(copper, 0, 0), splits, "poly", 1, loo=True)
    np.testing.assert_allclose(results.folds_of(0)[:, 0], expected, rtol=1e-8)
    # Holding income fixed turns the price effect around: in these years consumption grew with income
    # while the real price rose, so price alone shows demand rising with price.
    alone = fitcore.fit_batch(fitcore.from_columns({"market": copper.keys["market"].repeat(25)}, copper.price,
                                                   copper.volume), settings)
    assert alone.power_coef(0, 1)[1] > 0 > results.power_coef(0, 1)[1]


@pytest.fixture(scope="module")
def health():
    from statsmodels.datasets import randhie
    frame = randhie.load_pandas().data
    status = np.select([frame["hlthp"] == 1, frame["hlthf"] == 1, frame["hlthg"] == 1], ["poor", "fair", "good"],
                       "excellent")
    coinsurance = np.round(np.exp(frame["lncoins"].to_numpy()) - 1)  # percent: 0, 25, 50, 95, 100
    return fitcore.from_columns({"health": status.astype(object)}, coinsurance, frame["mdvis"].to_numpy(float),
                                controls={"deductible": frame["idp"].to_numpy(float), "incentive": frame["lpi"].to_numpy()})


def test_outpatient_visits_by_health_against_coinsurance(health):
    settings = fitcore.FitSettings(degrees=(0, 1, 2), folds=5)
    results = fitcore.fit_batch(health, settings)
    assert results.controls.binary == (True, False)
    assert results.available[:, :3].all() and not results.available[:, 3].any()  # no log of zero visits
    for s in range(health.n_series):
        price, volume, w, splits = series_folds(health, settings, s)
        controls = control_rows(health, s, 0)
        for c in range(3):
            design = np.column_stack([price ** k for k in range(c + 1)] + [controls])
            fit = sm.OLS(volume, design).fit()
            np.testing.assert_allclose(results.power_coef(s, c), fit.params[:c + 1], rtol=1e-7,
                                       atol=1e-10 * np.abs(fit.params).max())
            np.testing.assert_allclose(results.controls.coef[s, c], fit.params[c + 1:], rtol=1e-7)
        expected = refit_held_out(price, volume, w, controls, splits, "poly", 1)
        np.testing.assert_allclose(results.folds_of(s)[:, 1], expected, rtol=1e-8)
    # Paying more of the cost, patients visit less, with the plan type and incentive held.
    c = results.names.index("poly1")
    assert all(results.power_coef(s, c)[1] < 0 for s in range(health.n_series))
