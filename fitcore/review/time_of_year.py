"""The time of year a series has seen, for the season terms' ``outside-range``.

The season terms are functions of a date's phase d = (day of the year − 1) / days in that year
(``fit.controls.season_terms``).  A plan date is judged by that phase itself: days around the year to
the nearest row's, not term by term (weekly rows never reach ±1 in a term, so a plan date near a
term's peak would lie outside the values of every series, though its rows surround it).  Without a plan
date the prediction is the year's average, which averages every time of year: judged by the day of the
year farthest from every row (``widest_gaps``).
"""
from __future__ import annotations

import numpy as np

from ..fit.controls import day_phase

YEAR = 365.25  # days one turn of the phase counts as (a phase apart, in days, rounded to whole days)
MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def plan_phase(sin1: np.ndarray, cos1: np.ndarray) -> np.ndarray:
    """(S,) the plan date's phase from its first season pair; NaN at the year's average (both terms 0)."""
    sin1, cos1 = np.asarray(sin1, dtype=float), np.asarray(cos1, dtype=float)
    phase = np.arctan2(sin1, cos1) / (2 * np.pi) % 1.0
    return np.where((sin1 == 0) & (cos1 == 0), np.nan, phase)


def days_apart(a, b) -> np.ndarray:
    """Whole days between phases ``a`` and ``b`` the shorter way round the year."""
    turn = np.abs(np.asarray(a) - np.asarray(b)) % 1.0
    return np.rint(np.minimum(turn, 1.0 - turn) * YEAR)


def widest_gaps(phase: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """(S,) each series' widest gap, in whole days, between the times of year of its rows (``phase``, the
    series' rows one after another, ``counts`` of each, every count above 0), round the year: a day in the
    middle of it lies half the gap from the nearest row.  One row: the whole year, 365 days."""
    owner = np.repeat(np.arange(len(counts)), counts)
    order = np.argsort(owner + phase)  # by series, then time of year (a phase is below 1); half a lexsort's time
    phase = phase[order]
    starts = np.cumsum(counts) - counts
    following = np.append(phase[1:], 0.0)
    last = starts + counts - 1
    following[last] = phase[starts] + 1.0  # the last row of the year to the first of the next
    return np.maximum.reduceat(np.rint((following - phase) * YEAR), starts)


def day_month(phase: float) -> str:
    """A phase as the day and month it is: '1 Jul'.  A common year's days are n/365 and a leap year's
    n/366, never both (but for 1 Jan), so the phase says which year's calendar names it."""
    for length, year in ((365, 2001), (366, 2000)):
        day = float(phase) * length
        if abs(day - round(day)) < 1e-6:
            break
    else:
        length, year, day = 365, 2001, float(phase) * 365
    on = np.datetime64(f"{year}-01-01") + np.timedelta64(int(round(day)) % length, "D")
    return _label(on)


def _label(day: np.datetime64) -> str:
    _, month, dom = str(day)[:10].split("-")
    return f"{int(dom)} {MONTHS[int(month) - 1]}"


def stretches(date: np.ndarray, tolerance: int) -> list[tuple[str, str]]:
    """The stretches of the year one series' rows (``date``) cover, as (first, last) day and month, from
    January on; empty when no day of the year is more than ``tolerance`` days from a row (seen all year
    round).  A stretch ends at a gap holding such a day: a gap of more than 2·tolerance + 1 whole days."""
    if not len(date):
        return []
    phase = day_phase(date)
    order = np.argsort(phase, kind="stable")
    phase, date = phase[order], np.asarray(date)[order]
    gap = np.rint((np.append(phase[1:], phase[0] + 1.0) - phase) * YEAR)  # after each row, round the year
    ends = np.flatnonzero(gap > 2 * tolerance + 1)
    if not len(ends):
        return []
    pairs = sorted(zip((ends + 1) % len(phase), np.roll(ends, -1)))  # each stretch runs to the next gap
    return [(_label(date[a]), _label(date[b])) for a, b in pairs]


SAID_STRETCHES = 4  # at most this many stretches named (a small season_days splits weekly rows into 52)


def covered(date: np.ndarray, tolerance: int) -> str:
    """'6 Jan – 19 May' (stretches joined by 'and', the first ``SAID_STRETCHES`` of many, then how many more):
    what ``stretches`` says, as a sentence reads it."""
    parts = [first if first == last else f"{first} – {last}" for first, last in stretches(date, tolerance)]
    if len(parts) > SAID_STRETCHES:
        parts = parts[:SAID_STRETCHES] + [f"{len(parts) - SAID_STRETCHES} more stretches"]
    return " and ".join(parts) if parts else "the whole year"
