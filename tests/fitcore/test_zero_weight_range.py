"""A row of weight 0 is no observation: not among a series' observed prices or control values.

Every check over "the observed range" is judged over the rows of positive weight: ``rising`` (its share
of the range, compared with the roots of the chosen curve's derivative from numpy's ``Polynomial``),
``below-zero`` (the lowest volume over the range, against a dense numpy evaluation), ``price-gap`` (the
nearest observed price), ``outside-range`` for a control, the revenue-best price; the fit itself does
not move (the same power-basis coefficients as a fit without the rows of weight 0).  The data are
invented here: straight lines and parabolas with noise, and rows of weight 0 priced beyond the others.
"""
from __future__ import annotations

import numpy as np
from numpy.polynomial import Polynomial

import fitcore
from fitcore.review.flags import diagnose

CURVE = (1000.0, -400.0, 50.0)  # volume = 1000 − 400·p + 50·p²: falls to its lowest at p = 4, rises after


def parabola_data(extra=()):
    """Two series on ``CURVE``: "beyond" has its rows of positive weight at 2.0–3.8 and rows of weight 0 at
    4.2–6.0 (where the curve rises); "across" has rows of positive weight at 2.0–6.0 (a control: it rises
    over the prices it has).  ``extra``: more (name, price, volume, weight) series."""
    rng = np.random.default_rng(37)
    parts = []
    for name, low, high in (("beyond", 2.0, 3.8), ("across", 2.0, 6.0)):
        price = np.round(rng.uniform(low, high, 40), 3)
        price[:2] = low, high
        weight = np.round(rng.uniform(0.5, 2.0, 40), 2)
        if name == "beyond":
            price = np.concatenate([price, [4.2, 4.8, 5.4, 6.0]])
            weight = np.concatenate([weight, np.zeros(4)])
        volume = Polynomial(CURVE)(price) + rng.normal(0, 2, len(price))
        parts.append((np.full(len(price), name, dtype=object), price, volume, weight))
    parts.extend((np.full(len(p), name, dtype=object), p, v, w) for name, p, v, w in extra)
    product, price, volume, weight = (np.concatenate(column) for column in zip(*parts))
    return fitcore.from_columns({"product": product}, price, volume, weight=weight)


def positive_range(data, s):
    rows = slice(data.offsets[s], data.offsets[s + 1])
    price = data.price[rows][data.weight[rows] > 0]
    return float(np.min(price)), float(np.max(price))


def rising_share(coef, lo, hi):
    """The share of [lo, hi] where the polynomial ``coef`` (plain powers of price) rises: from the real roots
    of its derivative inside the range, the sign of the derivative between them."""
    slope = Polynomial(coef).deriv()
    cuts = sorted(r.real for r in slope.roots() if abs(r.imag) < 1e-9 and lo < r.real < hi)
    edges = [lo, *cuts, hi]
    return sum(b - a for a, b in zip(edges[:-1], edges[1:]) if slope((a + b) / 2) > 0) / (hi - lo)


def test_the_observed_range_is_that_of_the_rows_of_positive_weight():
    data = parabola_data()
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(2,), loglog=False, folds=5))
    for s in range(data.n_series):
        lo, hi = positive_range(data, s)
        assert (results.price_lo[s], results.price_hi[s]) == (lo, hi)
        assert (results.mid[s], results.half[s]) == ((lo + hi) / 2, (hi - lo) / 2)


def test_rising_is_judged_over_the_rows_of_positive_weight():
    """"beyond" rises only among its rows of weight 0 (from 4): not rising; "across" rises from 4 to 6 over
    prices it has: its share is numpy's, and it is flagged."""
    data = parabola_data()
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(2,), loglog=False, folds=5))
    diagnosis = diagnose(results)
    names = list(data.keys["product"])
    for name, flagged in (("beyond", False), ("across", True)):
        s = names.index(name)
        lo, hi = positive_range(data, s)
        expected = rising_share(results.power_coef(s, int(results.chosen[s])), lo, hi)
        np.testing.assert_allclose(diagnosis.numbers["rising_share"][s], expected, atol=1e-9)
        assert bool(diagnosis.flagged("rising")[s]) is flagged, name
    assert 0.4 < diagnosis.numbers["rising_share"][names.index("across")] < 0.6


def test_below_zero_and_the_revenue_best_price_are_judged_over_the_rows_of_positive_weight():
    """A line falling below zero only among its rows of weight 0 (beyond 5): not below zero; its revenue-best
    price lies within the prices of positive weight."""
    rng = np.random.default_rng(8)
    price = np.concatenate([rng.uniform(2.0, 4.0, 30), [4.0, 5.5, 6.0, 6.5]])
    volume = 500 - 100 * price + rng.normal(0, 3, len(price))
    weight = np.concatenate([rng.uniform(0.5, 2.0, 30), [1.0, 0.0, 0.0, 0.0]])
    data = parabola_data(extra=[("falling", price, volume, weight)])
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(1,), loglog=False, folds=5))
    diagnosis = diagnose(results)
    s = list(data.keys["product"]).index("falling")
    lo, hi = positive_range(data, s)
    grid = np.linspace(lo, hi, 100_001)
    lowest = Polynomial(results.power_coef(s, int(results.chosen[s])))(grid).min()
    assert lowest > 0 and not diagnosis.flagged("below-zero")[s]
    np.testing.assert_allclose(diagnosis.numbers["lowest_volume"][s], lowest, rtol=1e-6)
    assert lo <= results.revenue_price[s] <= hi


def test_outside_range_and_price_gap_with_rows_of_weight_zero_near_the_plan():
    data = parabola_data()
    names = list(data.keys["product"])
    beyond = names.index("beyond")
    plan = np.full(data.n_series, 3.0)
    plan[beyond] = 5.0  # among its rows of weight 0 (4.2–6.0), beyond every row of positive weight (≤ 3.8)
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(2,), loglog=False, folds=5), plan_price=plan)
    diagnosis = diagnose(results)
    assert diagnosis.flagged("outside-range")[beyond]
    assert not diagnosis.flagged("outside-range")[names.index("across")]
    # the nearest observed price to a plan price inside the range is one of positive weight
    rows = slice(data.offsets[beyond], data.offsets[beyond + 1])
    lo, hi = positive_range(data, beyond)
    inside = np.array([3.79, 3.0])  # 3.79: beside 3.8 (weight > 0); a row of weight 0 at 4.2 is no nearer
    results = fitcore.fit_batch(data, fitcore.FitSettings(degrees=(2,), loglog=False, folds=5), plan_price=inside[
        [0 if s == beyond else 1 for s in range(data.n_series)]])
    price = data.price[rows][data.weight[rows] > 0]
    np.testing.assert_allclose(diagnose(results).numbers["plan_gap"][beyond],
                               np.min(np.abs(price - 3.79)) / (hi - lo), rtol=1e-12)


def test_a_control_is_judged_over_the_rows_of_positive_weight():
    """A control's plan value seen only on rows of weight 0 is outside the values seen."""
    rng = np.random.default_rng(3)
    n = 40
    price = rng.uniform(2.0, 4.0, n)
    rival = np.concatenate([rng.uniform(2.0, 3.0, n - 4), [3.6, 3.8, 4.0, 4.2]])
    weight = np.concatenate([rng.uniform(0.5, 2.0, n - 4), np.zeros(4)])
    volume = 900 - 150 * price + 40 * rival + rng.normal(0, 5, n)
    data = fitcore.from_columns({"product": np.full(n, "rival nearby", dtype=object)}, price, volume, weight=weight,
                                controls={"rival": rival})
    settings = fitcore.FitSettings(degrees=(1,), loglog=False, folds=5)
    for at, outside in ((3.9, True), (2.5, False)):
        results = fitcore.fit_batch(data, settings, plan_price=3.0, plan_controls={"rival": np.array([at])})
        diagnosis = diagnose(results)
        assert diagnosis.numbers["control_hi"][0, 0] == np.max(rival[weight > 0])
        assert bool(diagnosis.flagged("outside-range")[0]) is outside, at


def test_the_fit_does_not_move_and_a_series_of_weight_zero_alone_has_no_model():
    """The power-basis coefficients agree with a fit of the rows of positive weight alone (the window now
    theirs, 1e-9); a series whose every row weighs 0 gets no model and says why."""
    data = parabola_data(extra=[("none weighs", np.array([2.0, 2.5, 3.0, 3.5] * 4), np.arange(16.0) + 100,
                                 np.zeros(16))])
    keep = data.weight > 0
    product = np.repeat(data.keys["product"], data.counts)
    alone = fitcore.from_columns({"product": product[keep]}, data.price[keep], data.volume[keep],
                                 weight=data.weight[keep])
    settings = fitcore.FitSettings(degrees=(0, 1, 2, 3), loglog=True, folds=5)
    ours, theirs = fitcore.fit_batch(data, settings), fitcore.fit_batch(alone, settings)
    names = list(data.keys["product"])
    for s, name in enumerate(list(alone.keys["product"])):
        t = names.index(name)
        assert (ours.price_lo[t], ours.price_hi[t]) == (theirs.price_lo[s], theirs.price_hi[s])
        for c in np.flatnonzero(theirs.available[s]):
            np.testing.assert_allclose(ours.power_coef(t, c), theirs.power_coef(s, c), rtol=1e-9)
    s = names.index("none weighs")
    assert ours.chosen[s] < 0 and (ours.price_lo[s], ours.price_hi[s]) == (2.0, 3.5)  # every row's: none weighs
    assert ours.reason_text(s, 0) == "every observation of this series weighs zero, so there is nothing to fit"
    assert [f["code"] for f in diagnose(ours).flags_of(s)] == ["few-points"]
    assert ours.weight_0[s] == 16 and ours.weight_0[names.index("beyond")] == 4


def test_a_row_of_weight_0_far_beyond_a_narrow_window_leaves_every_candidate_finite():
    """Prices of positive weight 1.0 and 1.000000001 (a window 1e-9 wide) and a row of weight 0 at 1e14: mapped
    onto the window it lay 2e23 half-widths out, and its exp(log residual) overflowed: 0·inf made the log
    families' held-out errors NaN ("its held-out errors overflow: … a mistyped one?") though the row weighs
    nothing.  Each candidate now equals its fit without that row; the loglog slope is checked against
    statsmodels WLS of ln volume on ln price over the rows of positive weight."""
    import statsmodels.api as sm
    rng = np.random.default_rng(5)
    price = np.where(np.arange(30) % 2, 1.000000001, 1.0)
    volume = 100 + rng.uniform(0, 5, 30)
    with_far = fitcore.from_columns({"product": np.full(31, "a", dtype=object)}, np.append(price, 1e14),
                                    np.append(volume, 50.0), weight=np.append(np.ones(30), 0.0))
    alone = fitcore.from_columns({"product": np.full(30, "a", dtype=object)}, price, volume, weight=np.ones(30))
    settings = fitcore.FitSettings(degrees=(0, 1), folds=5)
    far, near = fitcore.fit_batch(with_far, settings), fitcore.fit_batch(alone, settings)
    assert far.available[0].all() and np.isfinite(far.cv_mse[0]).all()
    np.testing.assert_allclose(far.cv_mse[0], near.cv_mse[0], rtol=1e-9)
    loglog = far.names.index("loglog")
    ols = sm.WLS(np.log(volume), sm.add_constant(np.log(price)), weights=np.ones(30)).fit()
    slope = fitcore.fit_batch(with_far, settings, plan_price=np.array([1.0000000005])).plan_elasticity[0, loglog]
    np.testing.assert_allclose(slope, ols.params[1], rtol=1e-4)  # (a slope over a 1e-9 wide range: ill-conditioned)


def test_a_row_of_weight_0_at_a_price_or_volume_of_0_leaves_the_log_families_as_they_were():
    """A weight-0 row of volume 0 (or price 0) made loglog and semilog unavailable ("needs every price and volume
    above zero") for the whole series, so the proposal, its plan volume and its flags changed for a row that
    weighs nothing (a trial: loglog 156.5 → poly1 115.6 at the plan price).  Each candidate now equals its fit
    without the row; the loglog slope against statsmodels WLS of ln volume on ln price over the weighed rows."""
    import statsmodels.api as sm
    rng = np.random.default_rng(41)
    price = 2 + np.arange(40) / 40
    volume = 800 * price ** -1.3 * rng.lognormal(0, 0.08, 40)
    settings = fitcore.FitSettings(semilog=True, folds=5)

    def fitted(extra_price, extra_volume):
        p, v = np.append(price, extra_price), np.append(volume, extra_volume)
        data = fitcore.from_columns({"product": np.full(len(p), "oak tea", dtype=object)}, p, v,
                                    weight=np.append(np.ones(40), np.zeros(len(p) - 40)))
        return fitcore.fit_batch(data, settings, plan_price=np.array([2.5]))
    alone = fitted([], [])
    for extra in (([120.0], [0.0]), ([0.0], [50.0]), ([0.0, 3.0], [0.0, 0.0])):
        with_idle = fitted(*extra)
        assert with_idle.available[0].all(), extra
        np.testing.assert_allclose(with_idle.cv_mse[0], alone.cv_mse[0], rtol=1e-12)
        np.testing.assert_allclose(with_idle.plan_volume[0], alone.plan_volume[0], rtol=1e-12)
    ols = sm.WLS(np.log(volume), sm.add_constant(np.log(price)), weights=np.ones(40)).fit()
    np.testing.assert_allclose(alone.plan_elasticity[0, alone.names.index("loglog")], ols.params[1], rtol=1e-9)
