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

from dataclasses import dataclass

import numpy as np

from ..compiled import compiled
from ..errors import SettingsError
from .gram_lanes import CONTROL_TOL

SEASON_MAX = 4
KEPT, CONSTANT, REDUNDANT = 0, 1, 2  # why a control is left out for a series
LEFT_OUT = {CONSTANT: "constant", REDUNDANT: "redundant"}


def season_names(k: int) -> list[str]:
    return [f"season_{kind}{i}" for i in range(1, k + 1) for kind in ("sin", "cos")]


def season_terms(date: np.ndarray, k: int) -> np.ndarray:
    """(2k, N) sin(2π·i·d), cos(2π·i·d) for i = 1…k, d = (day of the year − 1) / days in that year."""
    day = np.asarray(date).astype("datetime64[D]")
    year = day.astype("datetime64[Y]")
    start = year.astype("datetime64[D]")
    length = ((year + 1).astype("datetime64[D]") - start).astype(np.int64)
    angle = 2 * np.pi * (day - start).astype(np.int64) / length
    out = np.empty((2 * k, len(day)))
    for i in range(k):
        out[2 * i] = np.sin((i + 1) * angle)
        out[2 * i + 1] = np.cos((i + 1) * angle)
    return out


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
        if season and data.date is None:
            raise SettingsError("--season needs the date column: add --date COLUMN")
        binary = tuple(bool(data.control_binary.get(name, is_binary(data.controls[name]))) for name in columns)
        return cls(columns, binary, season)

    def raw(self, data, r0: int, r1: int, order: np.ndarray | None) -> np.ndarray:
        """(M, n) every term at dataset rows ``r0:r1``, in the working ``order`` (None: as they are)."""
        out = np.empty((len(self.names), r1 - r0))
        for j, name in enumerate(self.columns):
            out[j] = data.controls[name][r0:r1]
        if self.season:
            out[len(self.columns):] = season_terms(data.date[r0:r1], self.season)
        return out if order is None else out[:, order]

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
    vif: np.ndarray
    tied: np.ndarray
    plan: np.ndarray
    offset: np.ndarray

    @property
    def kept(self) -> np.ndarray:
        """(S,) controls each series keeps."""
        return (self.left_out == KEPT).sum(axis=1)


def chunk_controls(raw: np.ndarray, price: np.ndarray, weight: np.ndarray | None, offsets: np.ndarray,
                   plan: np.ndarray) -> ChunkControls:
    """The controls of one chunk: ``raw`` (M, n) and ``price`` (n,) in working order, series s owning
    rows ``offsets[s]:offsets[s + 1]``; ``plan`` (S, M) the plan values (NaN: the series' mean)."""
    m, n_s = raw.shape[0], len(offsets) - 1
    z = np.empty_like(raw)
    mean, gap, vif = np.zeros((n_s, m)), np.zeros((n_s, m)), np.empty(n_s)
    left_out, lone, tied = np.zeros((n_s, m), np.int8), np.full((n_s, m), -1, np.int64), np.full(n_s, -1, np.int64)
    centre(np.ascontiguousarray(raw, dtype=np.float64), price, np.empty(0) if weight is None else weight,
           offsets.astype(np.int64), CONTROL_TOL, z, mean, left_out, lone, gap, vif, tied)
    plan = np.where(np.isnan(plan), mean, plan)
    offset = np.where(left_out == KEPT, plan - mean, 0.0)
    return ChunkControls(z, mean, left_out, lone, gap, vif, tied, plan, offset)


@compiled
def centre(raw, price, w, offsets, tol, z, mean, left_out, lone, gap, vif, tied):
    """Per series: each control's mean, centred column, whether it is constant or redundant, its lone row;
    the variance inflation of price given the kept controls and the control most correlated with price."""
    m = raw.shape[0]
    weighted = len(w) > 0
    cross = np.zeros((m + 1, m + 1))
    lower = np.zeros((m + 1, m + 1))
    for s in range(len(offsets) - 1):
        a, b = offsets[s], offsets[s + 1]
        total_w = 0.0
        price_sum = 0.0
        for i in range(a, b):
            wi = w[i] if weighted else 1.0
            total_w += wi
            price_sum += wi * price[i]
        total_w = total_w if total_w > 0 else 1.0
        price_mean = price_sum / total_w
        for j in range(m):
            low = np.inf
            high = -np.inf
            acc = 0.0
            for i in range(a, b):
                wi = w[i] if weighted else 1.0
                acc += wi * raw[j, i]
                low = min(low, raw[j, i])
                high = max(high, raw[j, i])
            mean[s, j] = acc / total_w
            left_out[s, j] = 1 if not low < high else 0
            at_low = 0
            at_high = 0
            for i in range(a, b):
                at_low += raw[j, i] == low
                at_high += raw[j, i] == high
            if low < high and at_low + at_high == b - a and (at_low == 1 or at_high == 1):
                lone_value = low if at_low == 1 else high
                for i in range(a, b):
                    if raw[j, i] == lone_value:
                        lone[s, j] = i
                gap[s, j] = lone_value - (high if at_low == 1 else low)
            for i in range(a, b):
                z[j, i] = raw[j, i] - mean[s, j] if left_out[s, j] == 0 else 0.0
        # Centred cross products of [controls…, price], unit-diagonal Cholesky in that order.
        for j in range(m + 1):
            for k in range(j + 1):
                acc = 0.0
                for i in range(a, b):
                    wi = w[i] if weighted else 1.0
                    zj = z[j, i] if j < m else price[i] - price_mean
                    zk = z[k, i] if k < m else price[i] - price_mean
                    acc += wi * zj * zk
                cross[j, k] = acc
        best = -1.0
        tied[s] = -1
        for j in range(m + 1):
            d = cross[j, j]
            pivot = 1.0 if d > 0 else 0.0
            for k in range(j):
                pivot -= lower[j, k] * lower[j, k]
            usable = d > 0 and (pivot > tol if j < m else pivot > 0)
            if j < m and left_out[s, j] == 0 and not usable:
                left_out[s, j] = 2
                lone[s, j] = -1
                for i in range(a, b):
                    z[j, i] = 0.0
            root = np.sqrt(pivot) if usable else 1.0
            for i in range(j + 1, m + 1):
                if usable:
                    value = cross[i, j] / np.sqrt(cross[i, i] * d) if cross[i, i] > 0 else 0.0
                    for k in range(j):
                        value -= lower[i, k] * lower[j, k]
                    lower[i, j] = value / root
                else:
                    lower[i, j] = 0.0
            if j < m and usable and cross[m, m] > 0:
                corr = abs(cross[m, j]) / np.sqrt(cross[j, j] * cross[m, m])
                if corr > best:
                    best = corr
                    tied[s] = j
            if j == m:
                vif[s] = 1.0 / pivot if d > 0 and pivot > 0 else (np.inf if d > 0 else np.nan)
