"""What the numbers at the plan price are said to mean: no elasticity where price never varied, a flat chosen
curve's 0 called the model's choice, a control left out of a series' fit not called an extrapolation, a curve
in ln price not kept where price is a straight line of the controls, a variance inflation readable, and the
caution naming what the fit holds fixed rather than listing it as a confounder.

Invented data; the truth each check leans on is in the data made here (a slope of −200 a unit of price).
"""
from __future__ import annotations

import numpy as np

import fitcore
from fitcore.fit import reasons as R
from fitcore.review.flags import diagnose
from fitcore.review.formats import ratio
from fitcore.review.plan_words import caution, elasticity_of, held_words, revenue_words


def one_series(price, volume, **controls):
    data = fitcore.from_columns({"product": np.array(["a"] * len(price), dtype=object)}, price, volume,
                                controls=controls or None)
    return data


def flags_of(results) -> dict:
    return {f["code"]: f["message"] for f in diagnose(results).flags_of(0)}


def test_a_series_whose_price_never_varied_has_no_elasticity_and_no_price_to_blame():
    rng = np.random.default_rng(3)
    results = fitcore.fit_batch(one_series(np.full(20, 2.5), 500 + rng.normal(0, 20, 20)), plan_price=2.5)
    diagnosis = diagnose(results)
    c = int(results.chosen[0])
    assert results.plan_elasticity[0, c] == 0.0  # the engine's number stands (0 of a flat curve) …
    assert elasticity_of(results, diagnosis, 0, c) == "elasticity not estimable (price never varied in this series)"
    weak = flags_of(results)["weak-fit"]  # … and the weak fit is not blamed on price
    assert "price explains little" not in weak and "price never varied in this series, so the flat curve" in weak


def test_a_flat_curve_chosen_where_price_moved_with_a_control_names_the_control():
    rng = np.random.default_rng(11)
    price = rng.uniform(1.5, 3.5, 60)
    rival = 1.1 * price + rng.normal(0, 0.05, 60)
    volume = 1000 - 200 * price + 20 * rival + rng.normal(0, 20, 60)
    results = fitcore.fit_batch(one_series(price, volume, rival=rival), plan_price=2.5)
    if results.names[int(results.chosen[0])] != "poly0":  # the case of the trial: the rule took the flat curve
        results = fitcore.fit_batch(one_series(price, volume, rival=rival),
                                    fitcore.FitSettings(degrees=(0,), loglog=False), plan_price=2.5)
    diagnosis = diagnose(results)
    said = elasticity_of(results, diagnosis, 0, int(results.chosen[0]))
    assert said == ("elasticity 0: poly0 is flat (the model's choice, not a measurement); the price effect may sit "
                    "in rival's fitted term")
    tied = flags_of(results)["price-tied"]
    assert "the curve's slope may belong to either" not in tied and "the chosen curve (poly0) is flat" in tied


def test_price_a_straight_line_of_a_control_leaves_no_curve_in_ln_price_either():
    rng = np.random.default_rng(11)
    price = rng.uniform(1.5, 3.5, 60)
    volume = 1000 - 200 * price + rng.normal(0, 20, 60)
    results = fitcore.fit_batch(one_series(price, volume, rival=2 * price), plan_price=2.5)
    names = list(results.names)
    assert results.reason[0, names.index("poly1")] == R.CONTROL_TIED
    assert results.reason[0, names.index("loglog")] == R.CONTROL_TIED  # was fitted: elasticity +0.97 from curvature
    assert not results.available[0, names.index("loglog")]
    assert names[int(results.chosen[0])] == "poly0"


def test_a_control_left_out_of_a_series_fit_is_said_missing_not_extrapolated():
    rng = np.random.default_rng(5)
    price = rng.uniform(1.5, 3.5, 60)
    rival = rng.uniform(2, 4, 60)
    volume = 1000 - 200 * price + 20 * rival + rng.normal(0, 20, 60)
    data = one_series(price, volume, disp=np.zeros(60), rival=rival)
    results = fitcore.fit_batch(data, plan_price=2.5, plan_controls={"disp": np.array([1.0])})
    said = flags_of(results)["outside-range"]
    assert "extrapolation" not in said
    assert said == ("The plan's disp = 1 lies outside the disp values this series has seen (0): disp never varied "
                    "in this series, so it was left out of its fit and its effect is not in the number (it is held "
                    "at the values seen, whatever the plan says).")
    # a kept control outside its range is still an extrapolation, in the same sentence
    both = {"disp": np.array([1.0]), "rival": np.array([9.0])}
    said = flags_of(fitcore.fit_batch(data, plan_price=2.5, plan_controls=both))["outside-range"]
    assert said.startswith("The plan's rival = 9 lies outside the rival values this series has seen (")
    assert "; the prediction there is an extrapolation; the plan's disp = 1 lies outside" in said


def test_a_variance_inflation_reads_in_powers_of_ten_past_a_thousand():
    assert ratio(301345759.5) == "3.0e8" and ratio(203.56) == "203.6" and ratio(1234.0) == "1.2e3"
    assert ratio(float("inf")) == "n/a"


def test_the_caution_names_what_the_fit_holds_not_as_a_confounder():
    held = caution(["promo", "rival"], 1)
    assert held.startswith("This fit holds promo, rival and the season fixed;") and "seasons" not in held
    plain = caution()
    assert "promotions, seasons, stock-outs and competitors' prices" in plain and "holds" not in plain


def test_plan_words_say_the_fitted_curve():
    assert revenue_words("2.61", False) == \
        "revenue-maximising price of the fitted curve within the observed range: 2.61"
    assert revenue_words("9.00", True).endswith("rests on one high-influence observation (influential-point): read "
                                                "it with care")
    assert held_words({"promo": 1.0, "rival": 3.1, "season_sin1": 0.0, "season_cos1": 0.0}) == \
        "promo 1, rival 3.10, the season's average over the year (no plan date given)"
