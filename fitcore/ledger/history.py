"""The rows a signed curve was made on, as this cycle's data hold them.

A series' rows dated up to the signed data's last date are the signed data again only if they hash to the
decision's fingerprint (``revised`` where they do not: rows restated, back-filled, dropped or re-dated) —
hashed in row order, then in date order: ``Dataset.fingerprint_texts`` hashes dated rows in date order (the
same rows in another order are the same data), and so did every earlier version for a file kept in date order;
a decision signed earlier on a file in another order hashed its rows as they stood.  Where they were revised, ``history_fit`` measures the signed curve on them as they are now;
``fitcore.ledger.backtest`` decides what that means for the sign-off.  ``dated_rows`` finds a series' rows on
either side of a date for the backtest too.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled


def revised(data, series: np.ndarray, last: np.ndarray, signed: np.ndarray) -> np.ndarray:
    """(n,) bool: the rows of each ``series[i]`` dated up to ``last[i]`` do not hash as the fingerprint
    ``signed[i]`` (the rows the decision was made on), in row order nor in date order (NaT ``last``: never
    revised, nothing to compare)."""
    from ..data.dataset import hex_texts, series_digests
    dated = ~np.isnat(last)
    keep = np.zeros(data.n_rows, bool)
    rows, _ = dated_rows(data, series[dated], last[dated], after=False)
    keep[rows] = True
    digests = series_digests(data.fingerprint_columns, data.offsets, keep)
    now = np.asarray(hex_texts(digests[series[dated]]).to_pylist(), dtype=object)
    out = np.zeros(len(series), bool)
    out[dated] = now != signed[dated]
    moved = np.flatnonzero(out)
    if len(moved):  # the same rows in another order (a file sorted by price): signed in date order, still the same
        out[moved[_in_date_order(data, series[moved], last[moved]) == signed[moved]]] = False
    return out


def _in_date_order(data, series: np.ndarray, last: np.ndarray) -> np.ndarray:
    """(n,) object: the fingerprint of each ``series[i]``'s rows dated up to ``last[i]``, taken in date order
    (ties in row order) — what the signed data hashed as where they were kept in date order, as exports are."""
    from ..data.dataset import hex_texts, series_digests
    rows, owner = dated_rows(data, series, last, after=False)
    order = np.lexsort((data.date[rows], owner))  # stable: rows of one date keep their order
    rows = rows[order]
    offsets = np.concatenate(([0], np.cumsum(np.bincount(owner, minlength=len(series)))))
    digests = series_digests([column[rows] for column in data.fingerprint_columns], offsets)
    return np.asarray(hex_texts(digests).to_pylist(), dtype=object)


def history_fit(data, series: np.ndarray, last: np.ndarray, curves, which: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray]:
    """(rows, ratio): how many rows each ``series[i]`` has dated up to ``last[i]``, and its signed curve's
    (``which[i]`` of ``curves``: ``at(price, which)`` and ``cv_mse``, ``backtest._SignedCurves``) RMSE on them
    over its CV RMSE (NaN without any)."""
    rows, owner = dated_rows(data, series, last, after=False)
    count = np.bincount(owner, minlength=len(series))
    volume, _, _, _ = curves.at(data.price[rows], which[owner])
    with np.errstate(invalid="ignore", divide="ignore"):
        rmse = np.sqrt(np.bincount(owner, (volume - data.volume[rows]) ** 2, minlength=len(series)) / count)
        return count, np.where(count > 0, rmse / np.sqrt(curves.cv_mse[which]), np.nan)


def dated_rows(data, series: np.ndarray, last: np.ndarray, after: bool) -> tuple[np.ndarray, np.ndarray]:
    """(rows, owner): the rows of each ``series[i]`` of ``data`` dated on a day after ``last[i]`` (``after``; else
    on or before it), in row order, and the ``i`` each belongs to."""
    per_day = np.int64(np.timedelta64(1, "D") // np.timedelta64(1, np.datetime_data(data.date.dtype)[0]))
    return _rows_dated(data.offsets, series, data.date.view(np.int64), last.astype("datetime64[D]").view(np.int64),
                       per_day, after)


_NAT = np.iinfo(np.int64).min


@compiled
def _rows_dated(offsets, series, dates, last, per_day, after):
    """``dated_rows``: days since 1970 (NaT dates and NaT ``last`` never), ``dates`` in units of which ``per_day``
    make a day (floored to days, as numpy casts them).  One pass, not seven numpy passes over every row of the
    dataset."""
    n = 0
    for i in range(len(series)):
        if last[i] != _NAT:
            for r in range(offsets[series[i]], offsets[series[i] + 1]):
                if dates[r] != _NAT and (dates[r] // per_day > last[i]) == after:
                    n += 1
    rows, owner = np.empty(n, np.int64), np.empty(n, np.int64)
    n = 0
    for i in range(len(series)):
        if last[i] != _NAT:
            for r in range(offsets[series[i]], offsets[series[i] + 1]):
                if dates[r] != _NAT and (dates[r] // per_day > last[i]) == after:
                    rows[n], owner[n] = r, i
                    n += 1
    return rows, owner
