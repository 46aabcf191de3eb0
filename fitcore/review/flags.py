"""Flags: why a series needs a human, computed for all series at once.

``diagnose`` returns a ``Diagnosis``: a boolean (S, flags) matrix plus the
numbers each flag's sentence quotes.  Sentences are written on demand
(``flag_sentences``), since only flagged series need them.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cached_property

import numpy as np

from ..compiled import compiled, readonly
from ..fit import reasons as R
from ..fit.basis import polynomial
from ..fit.results import Results
from ..fit.weights import observed, weighed_counts
from .attention import attention_order
from .rising import MAX_STRETCHES, rising
from .thresholds import Thresholds

# code, severity, meaning.  "stop": the proposed curve should not go into a plan
# unseen; "warn": worth a look.  Codes are pricefold's own.
FLAGS = (
    ("few-points", "stop", "too few observations to trust a cross-validated choice"),
    ("no-model", "stop", "no candidate could be fitted and scored, so no curve is proposed"),
    ("flat-price", "stop", "price barely moved, so the data say little about response to price"),
    ("rising", "stop", "the chosen curve has volume rising with price over part of the range"),
    ("below-zero", "stop", "the chosen curve predicts negative volume in range or at the plan price"),
    ("outside-range", "stop", "the plan price (or a control's plan value) lies outside the values observed: "
                              "an extrapolation"),
    ("price-gap", "warn", "the plan price lies in a wide gap between the prices observed: the curve there is "
                          "carried across it by its shape, not by observations near it"),
    ("near-tie", "warn", "another candidate is about as good but predicts a materially different volume"),
    ("unsteady-folds", "warn", "one fold's held-out error dominates the others"),
    ("weak-fit", "warn", "low cross-validated R² (Q²), or none: the volumes it is judged on never vary"),
    ("influential-point", "warn", "one observation has a large influence on the chosen curve"),
    ("price-tied", "warn", "price moved together with a control, so its effect cannot be told apart from it"),
    ("shifted", "warn", "the signed curve failed on the data since sign-off, or the proposal moved far from it"),
    ("stale", "stop", "the data changed since the last sign-off"),
)
CODES = tuple(code for code, _, _ in FLAGS)
SEVERITY = {code: severity for code, severity, _ in FLAGS}
STOP = np.array([SEVERITY[code] == "stop" for code in CODES])  # (len(CODES),) the stop flags' columns
GRID = 41  # points over the observed price range for the lowest volume (its lowest point is refined)
SHAPE_BLOCK = 4096  # series put on the grid at once (bounds the work arrays)


@dataclass(frozen=True, eq=False)
class Diagnosis:
    """Flags of S series.  ``raised``: (S, len(CODES)) bool; ``numbers``: name → (S,) array, or (S, k) where a
    series has several (``rising_from``, ``rising_to``: each stretch where the chosen curve rises)."""

    results: Results
    thresholds: Thresholds
    raised: np.ndarray
    numbers: dict

    def flagged(self, code: str) -> np.ndarray:
        return self.raised[:, CODES.index(code)]

    def counts(self) -> dict[str, int]:
        totals = self.raised.sum(axis=0)
        return {code: int(totals[i]) for i, code in enumerate(CODES) if totals[i]}

    def n_stop(self) -> np.ndarray:
        return self.raised[:, STOP].sum(axis=1)

    def n_warn(self) -> np.ndarray:
        return self.raised[:, ~STOP].sum(axis=1)

    @cached_property
    def _attention(self) -> np.ndarray:
        return attention_of(self.raised, self.results.score)

    def attention_order(self) -> np.ndarray:
        """Series indices, most in need of a human first (``attention``: stop flags, warn flags, low score)."""
        return self._attention

    def controls_outside(self, s: int) -> bool:
        """Does a plan value of a control column lie outside the values series ``s`` has seen of it?  As
        ``diagnose`` found it (``control_ranges``); a diagnosis read back from a file asks the results."""
        outside = self.numbers.get("control_outside")
        if outside is None:
            outside = control_ranges(self.results, np.array([s]), self.thresholds.season_days)[2]
            s = 0
        return bool(outside[s].any())

    def flags_of(self, s: int) -> list[dict]:
        from .sentences import sentence
        return [{"code": code, "severity": SEVERITY[code], "message": sentence(self, s, code)}
                for i, code in enumerate(CODES) if self.raised[s, i]]


def attention_of(raised: np.ndarray, score) -> np.ndarray:
    """Series indices in attention order (``attention.attention_order``), read-only, by the flags ``raised``
    (S, len(CODES)) and ``score`` (S,): a diagnosis's own, or the flags its rows show
    (``shown_flags.shown_raised``)."""
    order = attention_order(raised[:, STOP].sum(axis=1), raised[:, ~STOP].sum(axis=1), score)
    order.flags.writeable = False
    return order


def mark_stale(diagnosis: Diagnosis, stale: np.ndarray) -> Diagnosis:
    """A copy of ``diagnosis`` with the ``stale`` flag raised where ``stale`` (S,) is True (from the ledger)."""
    raised = diagnosis.raised.copy()
    raised[:, CODES.index("stale")] = stale
    raised.flags.writeable = False
    return replace(diagnosis, raised=raised)


def mark_shifted(diagnosis: Diagnosis, backtest) -> Diagnosis:
    """A copy of ``diagnosis`` with ``shifted`` raised where ``backtest.shifted`` (from the ledger,
    ``fitcore.ledger.backtest``) and the backtest kept for the sentences (``numbers["backtest"]``)."""
    raised = diagnosis.raised.copy()
    raised[:, CODES.index("shifted")] = backtest.shifted
    raised.flags.writeable = False
    return replace(diagnosis, raised=raised, numbers={**diagnosis.numbers, "backtest": backtest})


def without_shifted(diagnosis: Diagnosis, where: np.ndarray | None = None) -> Diagnosis:
    """A copy of ``diagnosis`` with no ``shifted`` flag (``where``: (S,) bool, only there): a results file's
    backtest made against another ledger (``fitcore.ledger.elsewhere``) says nothing of the signers of the ledger
    it is read with, and one of a decision that no longer stands (``elsewhere.StandingNow``) nothing of what stands."""
    raised = diagnosis.raised.copy()
    raised[:, CODES.index("shifted")] = False if where is None else raised[:, CODES.index("shifted")] & ~where
    raised.flags.writeable = False
    return replace(diagnosis, raised=raised)


def diagnose(results: Results, thresholds: Thresholds = Thresholds()) -> Diagnosis:
    """Raise every flag that applies to every series of ``results``."""
    data = results.data
    n_s = results.n_series
    counts = weighed_counts(data.weight, data.offsets).astype(float)  # a row of weight 0 is no observation
    chosen = results.chosen
    has = chosen >= 0
    pick = np.maximum(chosen, 0)
    rows = np.arange(n_s)
    raised = np.zeros((n_s, len(CODES)), dtype=bool)
    numbers: dict[str, np.ndarray] = {}

    def flag(code, mask):
        raised[:, CODES.index(code)] = mask

    starved = ~has & np.isin(results.reason, [R.TOO_FEW_FOR_FOLDS, R.TOO_FEW_POINTS, R.NO_WEIGHT,
                                              R.WEIGHT_OVERFLOW]).all(axis=1)
    flag("few-points", (counts < thresholds.min_points) | starved)
    # Any other series left without a model (e.g. errors too large for float64): never silently unflagged.
    flag("no-model", ~has & ~starved)

    distinct, price_cv = _price_spread(results)
    numbers.update(distinct=distinct, price_cv=price_cv)
    flag("flat-price", (distinct < thresholds.min_distinct_prices) | (price_cv < thresholds.min_price_cv))

    shape = _shape(results)
    numbers.update(shape)
    flag("rising", has & (shape["rising_share"] > thresholds.rising_share))
    plan = results.plan_price
    planned = np.isfinite(plan)
    plan_volume = np.where(has, results.plan_volume[rows, pick], np.nan)
    flag("below-zero", has & ((shape["lowest_volume"] < 0) | (planned & (plan_volume < 0))))

    control_lo, control_hi, control_outside = control_ranges(results, season_days=thresholds.season_days)
    numbers.update(control_lo=control_lo, control_hi=control_hi, control_outside=control_outside)
    flag("outside-range", has & ((planned & ((plan < results.price_lo) | (plan > results.price_hi)))
                                 | control_outside.any(axis=1)))

    gap = plan_gaps(results)
    numbers.update(plan_gap=gap)
    with np.errstate(invalid="ignore"):
        flag("price-gap", has & (gap > thresholds.plan_gap))

    rival, rival_change, rival_volume, chosen_volume = _near_tie(results)
    numbers.update(rival=rival, rival_change=rival_change, rival_volume=rival_volume, chosen_volume=chosen_volume)
    flag("near-tie", has & (rival >= 0) & (np.abs(rival_change) > thresholds.near_tie_change))

    worst_fold, fold_ratio = _fold_spread(results)
    numbers.update(worst_fold=worst_fold, fold_ratio=fold_ratio)
    flag("unsteady-folds", has & (fold_ratio > thresholds.unsteady_ratio))

    # A volume that never varies leaves Q² undefined (0/0): no score is no pass, or accept-unflagged takes it.
    flag("weak-fit", has & ((results.score < thresholds.weak_score) | ~np.isfinite(results.score)))

    top_row, top_cook = results.top_row, results.top_cook
    cook_limit = np.maximum(4.0 / np.maximum(counts, 1), thresholds.cook_floor)
    numbers.update(top_row=top_row, top_cook=top_cook, cook_limit=cook_limit)
    # Cook's distance divides a residual by the residual variance: both rounding noise on an exact curve, the
    # product name alone (its place in the fold deal) flagged 40 rows on a line or not (a trial)
    exact = results.sigma2[np.arange(results.n_series), np.maximum(results.chosen, 0)] <= noise_floor(results)
    flag("influential-point", has & (top_cook > cook_limit) & ~exact)

    if results.controls is not None:  # judged on the fit with the controls held at the plan's values
        vif = np.asarray(results.controls.vif)
        numbers.update(price_vif=vif, tied=np.asarray(results.controls.tied))
        with np.errstate(invalid="ignore"):
            flag("price-tied", has & (vif > thresholds.price_tied_vif))
    raised.flags.writeable = False
    return Diagnosis(results, thresholds, raised, numbers)


def plan_gaps(results: Results) -> np.ndarray:
    """(S,) the distance from each series' plan price to its nearest observed price (of a row of positive
    weight, ``weights.observed``), as a share of its observed price range; NaN without a plan price, rows,
    or a range, or with the plan price outside it (that is ``outside-range``)."""
    data = results.data
    plan, lo, hi = results.plan_price, results.price_lo, results.price_hi
    out = np.full(results.n_series, np.nan)
    counts = np.diff(data.offsets)
    with np.errstate(invalid="ignore"):
        inside = np.isfinite(plan) & (counts > 0) & (hi > lo) & (lo <= plan) & (plan <= hi)
    if data.price is None or len(data.price) != data.offsets[-1] or not inside.any():
        return out
    apart = np.abs(data.price - np.repeat(np.where(inside, plan, 0.0), counts))
    seen = observed(data.weight, data.offsets)
    if seen is not None:  # a row of weight 0 is no observation near the plan price
        apart[~seen] = np.inf
    filled = np.flatnonzero(counts > 0)  # reduceat needs each start once: series without rows left out
    nearest = np.minimum.reduceat(apart, data.offsets[filled].astype(np.int64))
    span = hi[filled] - lo[filled]  # 0 for a series of one price: never inside, so never divided by
    out[filled] = np.where(inside[filled], nearest / np.where(inside[filled], span, 1.0), np.nan)
    return out


def control_ranges(results: Results, series: np.ndarray | None = None, season_days: int = Thresholds.season_days):
    """(S, M) each control term's lowest and highest value in each series' rows of positive weight
    (``weights.observed``) — the columns, then the season terms of its rows' dates — and (S, M) bool: the
    plan's value lies outside them (a curve held there is an extrapolation in that control).  The season is
    judged as a whole, every season term alike: a plan date more than ``season_days`` from the time of year
    of every row (``time_of_year``); without one, the year's average (every term 0), which averages every
    time of year, when some day of the year is more than ``season_days`` from every row (the series not seen
    all year round).  M = 0 without controls or rows.  ``series`` (indices): those series only,
    S = len(series) (one candidate's checks; ``diagnose`` keeps every series' answer:
    ``Diagnosis.controls_outside``)."""
    from ..fit.controls import day_phase, season_terms
    from .intervals import rows_of
    from .time_of_year import days_apart, plan_phase, widest_gaps
    data, ctl = results.data, results.controls
    offsets = data.offsets.astype(np.int64)
    columns = [] if ctl is None else [name for name in ctl.names if name in data.controls]
    dated = ctl is not None and data.date is not None and len(data.date) == offsets[-1]
    season = ctl.season if dated and len(columns) == len(ctl.names) - 2 * ctl.season else 0  # the terms in order
    whole = series is None
    series = np.arange(results.n_series) if whole else np.asarray(series, dtype=np.int64)
    lo, hi = (np.full((len(series), len(columns) + 2 * season), np.nan) for _ in range(2))
    counts = offsets[series + 1] - offsets[series]
    filled = counts > 0
    starts = (np.cumsum(counts) - counts)[filled]
    at = np.asarray(ctl.plan, dtype=float)[series, :lo.shape[1]] if lo.shape[1] else lo
    planned = plan_phase(at[:, len(columns)], at[:, len(columns) + 1]) if season else np.full(len(series), np.nan)
    nearest = np.full(len(series), np.nan)  # days from the plan date (or the farthest day) to the nearest row's
    if len(starts):
        rows = slice(None) if whole else rows_of(offsets, series)
        seen = observed(data.weight, offsets)
        if seen is not None:  # a row of weight 0 is no observation: the values seen are those of the others
            seen = seen[rows]
            rows = np.flatnonzero(seen) if whole else rows[seen]
            counts = np.zeros_like(counts)
            counts[filled] = np.add.reduceat(seen.astype(np.int64), starts)  # each above 0 (``observed``)
            starts = (np.cumsum(counts) - counts)[filled]
        terms = [np.asarray(data.controls[name], dtype=float) for name in columns]
        terms = [values[rows] if len(values) == offsets[-1] else None for values in terms]  # None: not these rows
        terms.extend(season_terms(data.date[rows], season) if season else ())
        for j, values in enumerate(terms):
            if values is not None:
                lo[filled, j] = np.minimum.reduceat(values, starts)
                hi[filled, j] = np.maximum.reduceat(values, starts)
        if season:
            phase = day_phase(data.date[rows])
            apart = days_apart(phase, np.repeat(planned, counts))  # NaN where the plan gives no date
            nearest[filled] = np.minimum.reduceat(apart, starts)
            average = np.isnan(planned) & filled  # the year's average: its day farthest from every row, half
            if average.any():  # the widest gap between the rows' times of year
                nearest[average] = np.floor(widest_gaps(phase[np.repeat(average, counts)], counts[average]) / 2)
    with np.errstate(invalid="ignore"):
        outside = (at < lo) | (at > hi)
        if season:  # by the days from a row's time of year: to the plan date's, or (no date) to the farthest
            outside[:, len(columns):] = (nearest > season_days)[:, None]
    return lo, hi, outside


def _price_spread(results: Results):
    """(S,) distinct prices, capped at 3 (1, 2 or "3 or more"), and the price coefficient of variation, of the
    rows of positive weight (``weights.observed``)."""
    data = results.data
    n_s = results.n_series
    inner, mean, var = np.zeros(n_s, np.int64), np.zeros(n_s), np.zeros(n_s)
    seen = observed(data.weight, data.offsets)
    price_moments(readonly(data.price), readonly(data.offsets.astype(np.int64)),
                  readonly(np.empty(0, bool) if seen is None else seen), readonly(results.price_lo),
                  readonly(results.price_hi), inner, mean, var)
    distinct = np.where(results.price_hi > results.price_lo, np.where(inner > 0, 3, 2), 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        cv = np.where(mean > 0, np.sqrt(var) / mean, 0.0)
    return distinct, cv


@compiled
def price_moments(price, offsets, seen, lo, hi, inner, mean, var):
    """Per series: how many prices lie strictly inside (lo, hi), their mean and (population) variance, over
    the rows ``seen`` (every row when ``seen`` is empty)."""
    every = len(seen) == 0
    for s in range(len(offsets) - 1):
        start, stop = offsets[s], offsets[s + 1]
        count = 0
        rows = 0
        total = 0.0
        for i in range(start, stop):
            if every or seen[i]:
                count += lo[s] < price[i] < hi[s]
                total += price[i]
                rows += 1
        if rows == 0:
            continue
        average = total / rows
        spread = 0.0
        for i in range(start, stop):
            if every or seen[i]:
                spread += (price[i] - average) ** 2
        inner[s] = count
        mean[s] = average
        var[s] = spread / rows


def _shape(results: Results) -> dict:
    """Where the chosen curve rises (``rising``: exact stretches, up to ``MAX_STRETCHES`` a series) and how low it
    goes (on a grid over the observed prices, its lowest point refined)."""
    n_s = results.n_series
    out = {name: np.full(n_s, np.nan) for name in ("rising_share", "rising_slope", "lowest_volume", "lowest_at")}
    out.update(rising_from=np.full((n_s, MAX_STRETCHES), np.nan), rising_to=np.full((n_s, MAX_STRETCHES), np.nan))
    grid = np.linspace(-1.0, 1.0, GRID)
    chosen = results.chosen
    coef = np.asarray(results.coef)
    for family, cols in results.lineup.groups:
        width = int(results.lineup.complexity[cols].max())  # the family's widest candidate
        series = np.flatnonzero((chosen >= cols.start) & (chosen < cols.stop))
        for start in range(0, len(series), SHAPE_BLOCK):
            rows = series[start:start + SHAPE_BLOCK]
            c = chosen[rows]
            mid, half = results.mid[rows], results.half[rows]
            curves = (coef[rows, c, :width], results.basis_mid[rows, c], results.basis_half[rows, c],
                      results.smear[rows, c])
            up = rising(family, *curves, results.price_lo[rows], results.price_hi[rows])
            out["rising_share"][rows], out["rising_slope"][rows] = up.share, up.steepest
            out["rising_from"][rows], out["rising_to"][rows] = up.start, up.stop
            price = mid[:, None] + half[:, None] * grid
            volume = family.on_grid(*curves, price, np.broadcast_to(grid, price.shape))
            lowest, lowest_at = np.empty(len(rows)), np.empty(len(rows))
            lowest_scan(volume, price, lowest, lowest_at)
            out["lowest_volume"][rows], out["lowest_at"][rows] = lowest, lowest_at
    return out


@compiled
def lowest_scan(volume, price, lowest_volume, lowest_at):
    """Per series, its chosen curve's lowest ``volume`` (S, G) on a grid of ``price`` (S, G) over its observed
    range, and that price: refined by a parabola through the grid minimum and its neighbours."""
    n_grid = volume.shape[1]
    for s in range(volume.shape[0]):
        low = 0  # as numpy's argmin: the first NaN, else the first smallest
        for g in range(n_grid):
            if np.isnan(volume[s, g]):
                low = g
                break
            if volume[s, g] < volume[s, low]:
                low = g
        centre_at = min(max(low, 1), n_grid - 2)
        left, centre, right = volume[s, centre_at - 1], volume[s, centre_at], volume[s, centre_at + 1]
        curvature = left - 2 * centre + right
        if low == centre_at and curvature > 0:
            shift = (left - right) / (2 * curvature)
            lowest_volume[s] = centre - (left - right) * shift / 4
            lowest_at[s] = price[s, centre_at] + shift * (price[s, 1] - price[s, 0])
        else:
            lowest_volume[s] = volume[s, low]
            lowest_at[s] = price[s, low]


def _near_tie(results: Results):
    """(S,) the candidate within one SE of the chosen one whose volume differs most, by what share, and the
    two volumes (a share means nothing where one is not above zero: the sentence then gives both)."""
    n_s = results.n_series
    rows = np.arange(n_s)
    pick = np.maximum(results.chosen, 0)
    volume = np.where(np.isfinite(results.plan_price)[:, None], results.plan_volume, _mid_volumes(results))
    base = volume[rows, pick]
    band = results.cv_mse[rows, pick] + results.cv_se[rows, pick]
    close = results.available & (results.cv_mse <= band[:, None])
    close[rows, pick] = False
    with np.errstate(divide="ignore", invalid="ignore"):
        change = np.where(close, (volume - base[:, None]) / np.abs(base)[:, None], 0.0)
    change = np.where(np.isfinite(change), change, 0.0)
    rival = np.argmax(np.abs(change), axis=1)
    has_rival = close.any(axis=1) & (results.chosen >= 0)
    return (np.where(has_rival, rival, -1), np.where(has_rival, change[rows, rival], 0.0),
            np.where(has_rival, volume[rows, rival], np.nan), np.where(has_rival, base, np.nan))


def _mid_volumes(results: Results) -> np.ndarray:
    """(S, C) each candidate's fitted volume at the middle of the observed prices."""
    out = np.empty(results.available.shape)
    n_s = results.n_series
    coef = np.asarray(results.coef)
    for family, cols in results.lineup.groups:  # all of a family's candidates in one pass
        k, width = cols.stop - cols.start, int(results.lineup.complexity[cols].max())
        t = family.grid_coordinate(np.repeat(results.mid, k), np.zeros(n_s * k),
                                   results.basis_mid[:, cols].ravel(), results.basis_half[:, cols].ravel())
        with np.errstate(invalid="ignore", over="ignore"):
            fitted = polynomial(coef[:, cols, :width].reshape(n_s * k, width), t)
            out[:, cols] = family.volume(fitted, results.smear[:, cols].ravel()).reshape(n_s, k)
    return out


def _fold_spread(results: Results):
    """(S,) the fold with the largest held-out error of the chosen curve, and that error over the median."""
    n_s = results.n_series
    n_folds = np.diff(results.fold_start)
    if n_s == 0 or not results.scheme.comparable_folds:
        return np.full(n_s, -1), np.zeros(n_s)
    k = int(n_folds[0])
    errors = results.fold_err.reshape(n_s, k, -1)[np.arange(n_s), :, np.maximum(results.chosen, 0)]
    median = np.median(errors, axis=1)
    worst = np.argmax(np.nan_to_num(errors, nan=-np.inf), axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(median > 0, errors[np.arange(n_s), worst] / median, 0.0)
        # held-out errors at rounding level (rows on an exact line: 8e-28 vs 3e-29, "25.6×") say nothing of the
        # folds: no ratio is judged
        noise = errors[np.arange(n_s), worst] <= noise_floor(results)
    return worst, np.where(noise, 0.0, np.nan_to_num(ratio))


NOISE_SHARE = 1e-20  # of a series' largest CV error: errors that small are rounding noise


def noise_floor(results: Results) -> np.ndarray:
    """(S,) ``NOISE_SHARE`` of each series' largest CV error among its candidates (-inf where none was fitted): a
    chosen curve's errors below it are rounding noise (rows on an exact curve), and ratios of them mean nothing."""
    return NOISE_SHARE * np.where(np.isfinite(results.cv_mse), results.cv_mse, -np.inf).max(axis=1)


