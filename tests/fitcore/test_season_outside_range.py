"""``outside-range`` for the season terms.  A plan date is judged by its time of year: outside when it lies
more than ``season_days`` (15) from the time of year of every row of the series, days counted round the
year between phases d = (day of the year − 1) / (days in that year) — the README's definition of the
terms — as a year of 365.25 days, rounded to whole days.  Without a plan date, the year's average (every
term 0), which averages every time of year, is outside when some day of the year lies more than
``season_days`` from every row.  Every phase, distance and day-and-month label here is worked out with the
standard library's calendar and datetime."""
from __future__ import annotations

import calendar
import datetime as dt
import math

import numpy as np
import pytest

import fitcore
from fitcore.errors import SettingsError
from fitcore.review.flags import diagnose
from fitcore.review.thresholds import Thresholds
from tests.fitcore.controls_support import weekly


def day(value) -> dt.date:
    return dt.date.fromisoformat(str(value)[:10])


def phase(value) -> float:
    d = day(value)
    return (d.timetuple().tm_yday - 1) / (366 if calendar.isleap(d.year) else 365)


def terms(value) -> tuple[float, float]:
    return math.sin(2 * math.pi * phase(value)), math.cos(2 * math.pi * phase(value))


def days_from(plan, dates) -> int:
    """Whole days from ``plan``'s time of year to the nearest of ``dates``', the shorter way round."""
    turns = [abs(phase(plan) - phase(d)) % 1.0 for d in dates]
    return min(round(min(t, 1.0 - t) * 365.25) for t in turns)


def label(value) -> str:
    d = day(value)
    return f"{d.day} {calendar.month_abbr[d.month]}"


def outside(data, plan_date=None, thresholds=Thresholds()):
    date = None if plan_date is None else np.array([plan_date], dtype="datetime64[ns]")
    results = fitcore.fit_batch(data, fitcore.FitSettings(season=1, degrees=(1,), loglog=False), plan_price=3.0,
                                plan_date=date)
    diagnosis = diagnose(results, thresholds)
    flags = {f["code"]: f["message"] for f in diagnosis.flags_of(0)}
    return diagnosis, flags.get("outside-range")


def season_outside(dates: list, plan_dates: list) -> np.ndarray:
    """(len(plan_dates),) whether the season raises ``outside-range``: one series of rows at ``dates`` per
    plan date, fitted together (a falling line in price)."""
    n, s = len(dates), len(plan_dates)
    rng = np.random.default_rng(5)
    price = np.round(rng.uniform(2, 4, n * s), 2)
    data = fitcore.from_columns({"product": np.repeat(np.arange(s).astype(str).astype(object), n)}, price,
                                500 - 60 * price + rng.normal(0, 5, n * s),
                                date=np.tile(np.array(dates, dtype="datetime64[D]"), s))
    results = fitcore.fit_batch(data, fitcore.FitSettings(season=1, degrees=(1,), loglog=False),
                                plan_price=np.full(s, 3.0), plan_date=np.array(plan_dates, dtype="datetime64[ns]"))
    return diagnose(results).numbers["control_outside"].any(axis=1)


def every_day(year: int) -> list[dt.date]:
    return [dt.date(year, 1, 1) + dt.timedelta(i) for i in range(366 if calendar.isleap(year) else 365)]


def test_part_of_a_year_at_the_year_average_is_outside_and_says_so():
    data = weekly("2025-01-06", 20)  # January to May
    diagnosis, said = outside(data)
    seen = np.array([terms(d) for d in data.date])
    np.testing.assert_allclose(diagnosis.numbers["control_lo"][0], seen.min(axis=0), rtol=1e-12)
    np.testing.assert_allclose(diagnosis.numbers["control_hi"][0], seen.max(axis=0), rtol=1e-12)
    assert seen[:, 0].min() > 0  # sin stays above 0 from January to May: 0 (the year's average) is outside
    assert said == ("The season's average over the year (no plan date given) rests on a series not seen all year "
                    f"round: its rows cover only {label(data.date[0])} – {label(data.date[-1])} of the year; the "
                    "prediction there is an extrapolation.")
    assert label(data.date[-1]) == "19 May"


@pytest.mark.parametrize("plan_date, raised", [("2025-08-01", True), ("2025-03-10", False),
                                               ("2025-06-03", False), ("2025-06-04", True),  # 15 and 16 days on
                                               ("2026-12-22", False), ("2026-12-21", True)])  # 15 and 16 before
def test_a_plan_date_outside_the_time_of_year_seen_is_outside_and_says_how_far(plan_date, raised):
    data = weekly("2025-01-06", 20)
    _, said = outside(data, plan_date)
    assert (said is not None) == raised
    assert (days_from(plan_date, data.date) > 15) == raised
    if raised:
        assert said == (f"The plan date ({label(plan_date)}) is {days_from(plan_date, data.date)} days from the "
                        "nearest time of year this series has seen (more than season_days = 15): its rows cover "
                        "6 Jan – 19 May of the year; the prediction there is an extrapolation.")


def test_the_threshold_decides_and_is_checked():
    data = weekly("2025-01-06", 20)
    assert outside(data, "2025-06-04")[1] is not None  # 16 days after 19 May
    assert outside(data, "2025-06-04", Thresholds(season_days=16))[1] is None
    with pytest.raises(SettingsError, match="threshold season_days is out of range: expected a whole number of "
                                            "days from 1 to 182, got 0"):
        Thresholds(season_days=0)


@pytest.mark.parametrize("plan_date", ["2027-01-01", "2027-01-02", "2027-04-02", "2027-07-01", "2027-10-01",
                                       "2027-12-31", "2028-02-29", "2028-12-31"])
def test_plan_dates_at_a_terms_peak_inside_two_years_of_weeks_are_inside(plan_date):
    """Weekly rows never reach ±1 in a term: the old term-by-term check flagged these on every series."""
    assert outside(weekly("2025-01-06", 104), plan_date)[1] is None


def test_rows_a_week_or_a_month_apart_round_the_year_never_trip_it():
    plans = every_day(2027) + every_day(2028)
    weeks = [dt.date(2025, 1, 6) + dt.timedelta(7 * i) for i in range(104)]
    months = [dt.date(y, m, 1) for y in (2023, 2024, 2025) for m in range(1, 13)]
    assert max(days_from(p, weeks) for p in plans) <= 4 and max(days_from(p, months) for p in plans) <= 15
    assert not season_outside(weeks, plans).any()
    assert not season_outside(months, plans).any()


def test_many_series_and_plan_dates_against_the_calendar():
    """Ragged spells of weeks or scattered days (leap years among them) against plan dates all round the year."""
    rng = np.random.default_rng(11)
    for trial in range(4):
        first = dt.date(2023, 1, 1) + dt.timedelta(int(rng.integers(0, 700)))
        dates = sorted({first + dt.timedelta(int(d)) for d in
                        (7 * np.arange(int(rng.integers(3, 30))) if trial % 2 else rng.integers(0, 200, 15))})
        plans = [dt.date(2027, 1, 1) + dt.timedelta(int(d)) for d in rng.integers(0, 730, 60)]
        expected = np.array([days_from(p, dates) > 15 for p in plans])
        assert 0 < expected.sum() < len(plans)
        np.testing.assert_array_equal(season_outside(dates, plans), expected)


def test_a_whole_year_at_its_average_is_inside():
    _, said = outside(weekly("2024-01-01", 60))
    assert said is None


def farthest_day(dates) -> int:
    """Whole days from the day of the year farthest from every row to the nearest row (calendar days of a
    common and a leap year alike)."""
    return max(days_from(d, dates) for d in every_day(2027) + every_day(2028))


@pytest.mark.parametrize("first, weeks", [("2024-09-16", 18),  # mid-September to mid-January: 0 within both
                                          ("2025-01-06", 48),  # a year but for its last five weeks
                                          ("2025-01-06", 52)])  # a whole year of weeks
def test_the_year_average_is_outside_unless_every_time_of_year_is_near_a_row(first, weeks):
    """The year's average averages every time of year.  Judged by the terms' values (0 inside each term's
    range), rows from mid-September to mid-January passed — a third of the year seen — as would any spell of
    a season term crossing both zeros."""
    data = weekly(first, weeks)
    seen = np.array([terms(d) for d in data.date])
    expected = farthest_day(list(data.date)) > 15
    assert expected == (weeks < 52)
    if weeks == 18:
        assert (seen.min(axis=0) < 0).all() and (seen.max(axis=0) > 0).all()  # the old check passed it
    _, said = outside(data)
    assert (said is not None) == expected
    if expected:
        assert said.startswith("The season's average over the year (no plan date given) rests on a series not seen "
                               "all year round: its rows cover only ")


def test_widest_gaps_of_ragged_series_against_the_calendar():
    """Series of 1 to 30 rows, unsorted, each one's widest gap round the year as the calendar counts it."""
    from fitcore.fit.controls import day_phase
    from fitcore.review.time_of_year import widest_gaps
    rng = np.random.default_rng(4)
    series = [[dt.date(2023, 1, 1) + dt.timedelta(int(d)) for d in rng.integers(0, 900, int(rng.integers(1, 30)))]
              for _ in range(40)] + [[dt.date(2024, 2, 29)]]
    expected = []
    for dates in series:
        p = sorted(phase(d) for d in dates)
        expected.append(max(round((b - a) * 365.25) for a, b in zip(p, p[1:] + [p[0] + 1.0])))
    flat = np.array([d for dates in series for d in dates], dtype="datetime64[D]")
    got = widest_gaps(day_phase(flat), np.array([len(dates) for dates in series]))
    np.testing.assert_array_equal(got, expected)
    assert got[-1] == 365  # one row: the whole year


def test_a_month_apart_round_the_year_at_the_year_average_is_inside_and_one_missing_month_is_not():
    months = [dt.date(2025, m, 1) for m in range(1, 13)]
    assert farthest_day(months) == 15
    assert not season_outside(months, [None])[0]
    assert farthest_day(months[:6] + months[7:]) == 31 and season_outside(months[:6] + months[7:], [None])[0]


def test_the_stretches_covered_name_each_spell():
    from fitcore.review.time_of_year import covered
    spring = [dt.date(2025, 1, 6) + dt.timedelta(7 * i) for i in range(20)]
    winter = [dt.date(2025, 11, 3) + dt.timedelta(7 * i) for i in range(4)]
    assert covered(np.array(spring + winter, dtype="datetime64[D]"), 15) == "6 Jan – 19 May and 3 Nov – 24 Nov"
    across = [dt.date(2024, 11, 4) + dt.timedelta(7 * i) for i in range(14)]  # over the turn of the year
    assert covered(np.array(across, dtype="datetime64[D]"), 15) == f"4 Nov – {label(across[-1])}"


def test_many_stretches_are_named_up_to_four_then_counted():
    """With a small season_days weekly rows split into 52 stretches: four named, the rest counted (a trial read
    a sentence of 52 'and's)."""
    from fitcore.review.time_of_year import covered
    weeks = [dt.date(2025, 1, 6) + dt.timedelta(7 * i) for i in range(52)]
    said = covered(np.array(weeks, dtype="datetime64[D]"), 1)
    assert said.count(" and ") == 4 and said.endswith(" and 48 more stretches")
    assert said.startswith(f"{label(weeks[0])} and {label(weeks[1])} and ")
