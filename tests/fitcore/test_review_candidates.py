"""Each candidate's own flags (``candidate_checks``) and the shared sentences (``choice``).

The constructed series are textbook shapes: a straight line rising with price rises over the whole
range; a line falling through zero inside the range goes below zero there (the point where
100 − 60·p = 0 is p = 5/3, by hand).  The thresholds are pricefold's own rules.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

import fitcore
from fitcore.data.loader import Columns, load
from fitcore.data.plan import plan_prices
from fitcore.review.candidate_checks import candidate_checks
from fitcore.review.choice import plan_position, score_meaning, why_chosen
from fitcore.review.flags import diagnose

P = np.linspace(1, 2, 40)
SAMPLE = Path(__file__).parents[2] / "sample"


def fitted(volume, plan=None):
    data = fitcore.from_columns({"product": np.array(["x"] * len(P), dtype=object)}, P, np.asarray(volume, float))
    return fitcore.fit_batch(data, plan_price=plan)


def test_a_line_rising_with_price_rises_over_the_whole_range_for_every_degree():
    results = fitted(100 + 20 * P + np.sin(np.arange(len(P))) * 0.01)
    for c, name in enumerate(results.names):
        if name.startswith("poly") and name != "poly0":
            checks = candidate_checks(results, 0, c)
            assert checks.rising_share == pytest.approx(1.0) and "rising" in checks.codes, name
    assert "rising" not in candidate_checks(results, 0, results.names.index("poly0")).codes  # a constant is flat


def test_a_line_through_zero_goes_below_zero_where_it_crosses():
    results = fitted(100 - 60 * P + np.sin(np.arange(len(P))) * 0.01)
    c = results.names.index("poly1")
    checks = candidate_checks(results, 0, c)
    assert "below-zero" in checks.codes and "rising" not in checks.codes
    assert checks.lowest_at == pytest.approx(2.0) and checks.lowest_volume == pytest.approx(-20, abs=0.05)
    assert candidate_checks(results, 0, results.names.index("loglog")).codes == ()  # unavailable: volume ≤ 0


def test_a_plan_price_outside_the_observed_prices_is_outside_for_every_candidate():
    results = fitted(200 - 30 * P + np.cos(np.arange(len(P))), plan=2.5)
    for c, name in enumerate(results.names):
        if results.available[0, c]:
            assert "outside-range" in candidate_checks(results, 0, c).codes, name
    inside = fitted(200 - 30 * P + np.cos(np.arange(len(P))), plan=1.5)
    assert all("outside-range" not in candidate_checks(inside, 0, c).codes for c in range(len(inside.names)))


def test_for_the_chosen_candidate_they_agree_with_the_series_flags_on_the_sample():
    data = load(SAMPLE / "wholesale.csv", Columns(segments=("region",), date="week"))
    results = fitcore.fit_batch(data, plan_price=plan_prices(data, SAMPLE / "plan.csv"))
    diagnosis = diagnose(results)
    for s in range(results.n_series):
        if results.chosen[s] < 0:
            continue
        got = set(candidate_checks(results, s, int(results.chosen[s]), diagnosis.thresholds).codes)
        want = {code for code in ("rising", "below-zero", "outside-range") if diagnosis.flagged(code)[s]}
        assert got == want, (s, got, want)


def test_why_chosen_names_the_rule_and_the_numbers():
    scored = [("poly0", 10.0, 1.0), ("poly1", 9.5, 2.0), ("poly2", 9.0, 1.5)]
    assert why_chosen(scored, "poly2", "lowest") == "lowest mean CV error (9)"
    assert why_chosen(scored, "poly0", "one-se") == ("simplest candidate within one standard error of the lowest "
                                                     "CV error (poly2 9 ± 1.50; poly0 10 ≤ 10.50)")
    assert why_chosen([], None, "one-se") == "no candidate could be fitted and cross-validated"


def test_score_meaning_compares_with_predicting_the_average():
    assert score_meaning(-0.04, 0.3) == "Q² −4%: worse than predicting the average volume"
    assert score_meaning(0.12, 0.3) == "Q² 12%: barely better than predicting the average volume"
    assert score_meaning(0.85, 0.3) == "Q² 85%: held-out errors are 15% of those of predicting the average volume"
    assert "no score" in score_meaning(math.nan, 0.3)


def test_plan_position_in_words():
    assert plan_position(2.2, 1.61, 2.73) == "at 53% of the observed range 1.61–2.73"
    assert plan_position(3.96, 1.31, 2.42) == "1.54 above the highest price observed (2.42): an extrapolation"
    assert plan_position(0.58, 0.60, 0.61).startswith("0.02 below the lowest price observed (0.60)")
    assert plan_position(math.nan, 1, 2) == "no plan price"

