"""``outside-range`` for the season terms: a plan date whose season lies outside the weeks a series has seen, or
the year's average (no plan date) outside them, is an extrapolation as a control's plan value outside its
values is.  The observed ranges are checked against sin/cos of 2π·(day of the year − 1)/(days in that year)
worked out here with the standard library's calendar (the README's definition of the terms)."""
from __future__ import annotations

import calendar
import datetime as dt
import math

import numpy as np
import pytest

import fitcore
from fitcore.review.flags import diagnose
from tests.fitcore.controls_support import weekly


def terms(day: np.datetime64) -> tuple[float, float]:
    d = dt.date.fromisoformat(str(day)[:10])
    turn = 2 * math.pi * (d.timetuple().tm_yday - 1) / (366 if calendar.isleap(d.year) else 365)
    return math.sin(turn), math.cos(turn)


def outside(data, plan_date=None):
    date = None if plan_date is None else np.array([plan_date], dtype="datetime64[ns]")
    results = fitcore.fit_batch(data, fitcore.FitSettings(season=1, degrees=(1,), loglog=False), plan_price=3.0,
                                plan_date=date)
    diagnosis = diagnose(results)
    flags = {f["code"]: f["message"] for f in diagnosis.flags_of(0)}
    return diagnosis, flags.get("outside-range")


def test_part_of_a_year_at_the_year_average_is_outside_and_says_so():
    data = weekly("2025-01-06", 20)  # January to May
    diagnosis, said = outside(data)
    seen = np.array([terms(d) for d in data.date])
    np.testing.assert_allclose(diagnosis.numbers["control_lo"][0], seen.min(axis=0), rtol=1e-12)
    np.testing.assert_allclose(diagnosis.numbers["control_hi"][0], seen.max(axis=0), rtol=1e-12)
    assert seen[:, 0].min() > 0  # sin stays above 0 from January to May: 0 (the year's average) is outside
    assert said is not None and said.startswith("The season's average over the year (every season term 0: no plan "
                                                 "date given) lies outside the weeks this series has seen")
    assert "season_sin1 0.086 to 0.999 there" in said and "season_cos1" not in said


@pytest.mark.parametrize("plan_date, raised", [("2025-08-01", True), ("2025-03-10", False)])
def test_a_plan_date_outside_the_weeks_seen_is_outside(plan_date, raised):
    data = weekly("2025-01-06", 20)
    _, said = outside(data, plan_date)
    assert (said is not None) == raised
    if raised:
        sin, cos = terms(np.datetime64(plan_date))
        assert said.startswith(f"The season at the plan date (season_sin1 = {sin:.3f}, season_cos1 = {cos:.3f}) "
                               "lies outside the weeks this series has seen")


def test_a_whole_year_at_its_average_is_inside():
    _, said = outside(weekly("2024-01-01", 60))
    assert said is None

