"""Controls: the other drivers of volume, held fixed while each price curve is estimated.

A control is a numeric column of the data (a promotion or holiday flag, a
display, a competitor's price) or a season term: ``season`` = K adds K pairs
sin(2π·k·d), cos(2π·k·d), d the date's day of the year as a share of its
year (``season_sin1``, ``season_cos1``, …).  Every candidate's design then is
its price shape plus the same controls (on ln volume for the log families).

Per series, in each chunk (``chunk_controls``):

- each control is centred on its series mean (weighted), so a fit's
  intercept is its curve at the series' average controls;
- a control constant within the series (``CONSTANT``), or adding nothing to
  the controls before it there (``REDUNDANT``), is left out for that series:
  its centred column is set to 0, which every fit drops (``gram_lanes``);
- the variance inflation of price given the controls kept, and the control
  moving most with price (Pearson correlation), for the ``price-tied`` flag;
- a *lone row*: the one row on which a two-valued control differs from all
  the others.  Leaving that row out leaves the control constant in training,
  so the leave-one-out prediction is the fit without it (``lone_effect``).

Plan values (what curves, intervals, elasticities, revenue-best prices and
flags hold the controls at): the plan file's, else 0 for a 0/1 control (a
column holding only 0 and 1 in the whole file), the series' mean for any
other, and 0 for every season term (their average over a year).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..compiled import compiled, readonly
from ..errors import SettingsError

SEASON_MAX = 4
KEPT, CONSTANT, REDUNDANT = 0, 1, 2  # why a control is left out for a series
LEFT_OUT = {CONSTANT: "constant", REDUNDANT: "redundant"}


def season_names(k: int) -> list[str]:
    return [f"season_{kind}{i}" for i in range(1, k + 1) for kind in ("sin", "cos")]


def season_terms(date: np.ndarray, k: int, out: np.ndarray | None = None) -> np.ndarray:
    """(2k, N) sin(2π·i·d), cos(2π·i·d) for i = 1…k, d = (day of the year − 1) / days in that year.

    Dates are whole days: each row looks its terms up in a table of the 365 + 366 possible days."""
    days = np.asarray(date).astype("datetime64[ns]", copy=False)
    slot = np.empty(len(days), dtype=np.int64)
    day_slots(readonly(days.view(np.int64)), slot)
    angle = 2 * np.pi * np.concatenate((np.arange(365) / 365, np.arange(366) / 366))
    out = np.empty((2 * k, len(days))) if out is None else out
    for i in range(k):
        np.take(np.sin((i + 1) * angle), slot, out=out[2 * i])
        np.take(np.cos((i + 1) * angle), slot, out=out[2 * i + 1])
    return out


def day_phase(date: np.ndarray) -> np.ndarray:
    """(N,) each date's d = (day of the year − 1) / days in that year: its time of year, in [0, 1)."""
    days = np.asarray(date).astype("datetime64[ns]", copy=False)
    slot = np.empty(len(days), dtype=np.int64)
    day_slots(readonly(days.view(np.int64)), slot)
    return np.concatenate((np.arange(365) / 365, np.arange(366) / 366))[slot]


@compiled
def day_slots(ticks, out):
    """Each date (``ticks`` nanoseconds since 1970-01-01) as its place in a table of a common year's 365
    days then a leap year's 366: its day of the year from 0, plus 365 in a leap year.  Worked out once
    per day of the dates' span (datetime64[ns] spans at most 213,000 days), then looked up."""
    if len(ticks) == 0:
        return
    first = ticks[0] // 86_400_000_000_000
    last = first
    for i in range(len(ticks)):
        day = ticks[i] // 86_400_000_000_000
        first = min(first, day)
        last = max(last, day)
    table = np.empty(last - first + 1, dtype=np.int64)
    for d in range(first, last + 1):
        table[d - first] = _day_slot(d)
    for i in range(len(ticks)):
        out[i] = table[ticks[i] // 86_400_000_000_000 - first]


@compiled(inline=True)
def _day_slot(days):
    """The table place of the day ``days`` since 1970-01-01 (civil calendar, proleptic Gregorian)."""
    shifted = days + 719468  # days since 0000-03-01
    era = (shifted if shifted >= 0 else shifted - 146096) // 146097
    of_era = shifted - era * 146097
    year_of_era = (of_era - of_era // 1460 + of_era // 36524 - of_era // 146096) // 365
    from_march = of_era - (365 * year_of_era + year_of_era // 4 - year_of_era // 100)
    year = year_of_era + era * 400 + (1 if from_march >= 306 else 0)
    leap = (year % 4 == 0 and year % 100 != 0) or year % 400 == 0
    # from_march counts from March 1: January and February close the previous March-year
    day = from_march - 306 if from_march >= 306 else from_march + 59 + (1 if leap else 0)
    return day + (365 if leap else 0)


def check_season(season: int, has_date: bool) -> None:
    """Season terms need a date column: the one place that says so (options and engine alike)."""
    if season and not has_date:
        raise SettingsError("--season needs the date column: add --date COLUMN (settings file: date in [columns])")


def is_binary(values: np.ndarray) -> bool:
    """A 0/1 control: every value 0 or 1."""
    return bool(np.all((values == 0) | (values == 1)))


@dataclass(frozen=True)
class ControlSpec:
    """The controls of a fit: the data's ``columns`` (``binary``: 0/1 each) and ``season`` pairs."""

    columns: tuple[str, ...]
    binary: tuple[bool, ...]
    season: int

    @property
    def names(self) -> list[str]:
        """The terms of the design, in order: the columns, then the season terms."""
        return [*self.columns, *season_names(self.season)]

    @classmethod
    def of(cls, data, settings) -> "ControlSpec | None":
        """The controls ``data`` carries and ``settings`` asks for; None when there are none."""
        season = int(getattr(settings, "season", 0) or 0)
        columns = tuple(data.controls)
        if not columns and not season:
            return None
        check_season(season, data.date is not None)
        binary = tuple(bool(data.control_binary[name]) if name in data.control_binary else is_binary(data.controls[name])
                       for name in columns)
        return cls(columns, binary, season)

    def raw(self, data, r0: int, r1: int, order: np.ndarray | None) -> np.ndarray:
        """(M, n) every term at dataset rows ``r0:r1``, in the working ``order`` (None: as they are)."""
        out = np.empty((len(self.names), r1 - r0))

        def take(values, into):
            return np.take(values[r0:r1], order, out=into) if order is not None else np.copyto(into, values[r0:r1])
        for j, name in enumerate(self.columns):
            take(data.controls[name], out[j])
        if self.season:
            date = data.date[r0:r1] if order is None else data.date[r0:r1][order]
            season_terms(date, self.season, out[len(self.columns):])
        return out

    def plan_values(self, n_series: int, plan_controls: dict | None, plan_date) -> np.ndarray:
        """(S, M) the plan's value of every term; NaN where the series' mean is to be used."""
        out = np.full((n_series, len(self.names)), np.nan)
        given = plan_controls or {}
        for j, name in enumerate(self.columns):
            default = 0.0 if self.binary[j] else np.nan
            values = given.get(name)
            out[:, j] = default if values is None else np.where(np.isnan(values), default, values)
        if self.season:
            terms = np.zeros((2 * self.season, n_series))
            if plan_date is not None:
                dated = ~np.isnat(plan_date)
                terms[:, dated] = season_terms(plan_date[dated], self.season)
            out[:, len(self.columns):] = terms.T
        return out

    def defaults(self) -> dict:
        """What a results file's settings say about the plan values, term by term."""
        out = {name: "0 (a 0/1 control) unless the plan file gives it" if binary
               else "the series' mean unless the plan file gives it" for name, binary in zip(self.columns, self.binary)}
        if self.season:
            out["season"] = "the average over the year (every season term 0) unless the plan file gives plan_date"
        return out


@dataclass(frozen=True, eq=False)
class PriceTie:
    """How price and the controls move together in each series, from its fit on all rows (S series, m
    controls): ``vif`` (S,) the variance inflation of price given the controls kept, ``tied`` (S,) the
    kept control most correlated with price (-1: none), ``redundant`` (S, m) controls that add nothing
    to the ones before them (not constant, but a combination of the others)."""

    vif: np.ndarray
    tied: np.ndarray
    redundant: np.ndarray


@dataclass(frozen=True, eq=False)
class ChunkControls:
    """One chunk's controls, M terms, S series, n rows in working order.

    - ``z``: (M, n) centred on each series' mean, 0 where left out for the series.
    - ``mean``: (S, M) each series' mean; ``left_out``: (S, M) int8 ``KEPT``, ``CONSTANT`` or ``REDUNDANT``.
    - ``lone``: (S, M) the working row of a control's lone row (-1: none); ``gap``: (S, M) its value
      less the control's value on every other row.
    - ``vif``: (S,) variance inflation of price given the controls kept (1 with none; NaN for a
      single price); ``tied``: (S,) the term moving most with price (-1: none).
    - ``plan``: (S, M) the plan values; ``offset``: (S, M) plan less mean, 0 where left out: the
      centred values the curves are held at.
    """

    z: np.ndarray
    mean: np.ndarray
    left_out: np.ndarray
    lone: np.ndarray
    gap: np.ndarray
    plan: np.ndarray
    vif: np.ndarray | None = None
    tied: np.ndarray | None = None
    offset: np.ndarray | None = None

    @property
    def kept(self) -> np.ndarray:
        """(S,) controls each series keeps."""
        return (self.left_out == KEPT).sum(axis=1)


def chunk_controls(raw: np.ndarray, weight: np.ndarray | None, offsets: np.ndarray, plan: np.ndarray
                   ) -> ChunkControls:
    """The controls of one chunk: ``raw`` (M, n) in working order, series s owning rows
    ``offsets[s]:offsets[s + 1]``; ``plan`` (S, M) the plan values (NaN: the series' mean).  The
    variance inflation, the tied control and the redundant controls come from the fits (``tied_to_price``)."""
    m, n_s = raw.shape[0], len(offsets) - 1
    z = np.empty_like(raw)
    mean, gap = np.zeros((n_s, m)), np.zeros((n_s, m))
    left_out, lone = np.zeros((n_s, m), np.int8), np.full((n_s, m), -1, np.int64)
    centre(readonly(np.ascontiguousarray(raw, dtype=np.float64)), readonly(np.empty(0) if weight is None else weight),
           readonly(offsets.astype(np.int64)), z, mean, left_out, lone, gap)
    plan = np.where(np.isnan(plan), mean, plan)
    return ChunkControls(z, mean, left_out, lone, gap, plan)


def tied_to_price(ctl: ChunkControls, tie: PriceTie) -> ChunkControls:
    """``ctl`` completed from a fit in price: the controls left out as redundant, the variance inflation
    of price and the control tied to it; the offsets of the plan values from the means, 0 where left out."""
    left_out = np.where((ctl.left_out == KEPT) & tie.redundant, np.int8(REDUNDANT), ctl.left_out)
    offset = np.where(left_out == KEPT, ctl.plan - ctl.mean, 0.0)
    return replace(ctl, left_out=left_out, vif=tie.vif, tied=tie.tied, offset=offset)


@compiled
def centre(raw, w, offsets, z, mean, left_out, lone, gap):
    """Per series and control, a column at a time: its (weighted) mean, its centred column (0 when
    constant), whether it is constant, and its lone row and gap (see ``ChunkControls``)."""
    weighted = len(w) > 0
    for s in range(len(offsets) - 1):
        a, b = offsets[s], offsets[s + 1]
        total_w = 0.0
        for i in range(a, b):
            total_w += w[i] if weighted else 1.0
        total_w = total_w if total_w > 0 else 1.0
        for j in range(raw.shape[0]):
            column, out = raw[j], z[j]
            acc = 0.0
            low = np.inf
            high = -np.inf
            for i in range(a, b):
                value = column[i]
                acc += (w[i] if weighted else 1.0) * value
                low = min(low, value)
                high = max(high, value)
            average = acc / total_w
            mean[s, j] = average
            lone[s, j] = -1
            gap[s, j] = 0.0
            if not low < high:
                left_out[s, j] = 1
                for i in range(a, b):
                    out[i] = 0.0
                continue
            left_out[s, j] = 0
            at_low = 0
            at_high = 0
            for i in range(a, b):
                value = column[i]
                at_low += value == low
                at_high += value == high
                out[i] = value - average
            if at_low + at_high == b - a and (at_low == 1 or at_high == 1):  # one side on a single row
                lone_value = low if at_low == 1 else high
                gap[s, j] = lone_value - (high if at_low == 1 else low)
                for i in range(a, b):
                    if column[i] == lone_value:
                        lone[s, j] = i
