"""What results carry for the next planning cycle, in both formats (one block, apart from the rest).

- Per candidate, what a signed curve's interval needs at a new price: ``sigma2`` (residual
  variance on the fit scale), ``df`` and ``cov_unscaled`` ((XᵀWX)⁻¹ in the candidate's basis,
  p × p; Parquet: its p·p entries row by row); in JSON also ``basis`` (regressor, window and the
  coefficients of powers of t, which Parquet keeps in ``window_coef``).
- Per series ``last_date`` (the last date of its rows, or null without a date column).
- Per series the backtest of its signed curve against the ledger (``fit --ledger``; see
  ``fitcore.ledger.backtest``), and in the header the ledger and its head the fit read.

So a decision can be signed from a results file alone (``accept-unflagged``, ``ledger carry``,
triage on stored results) with a complete snapshot.
"""
from __future__ import annotations

import math

import numpy as np

from ..arrays import from_numpy, numbers, text, texts
from ..fit.results import Results
from ..review.intervals import BLOCK, candidate_covariances, covariances, last_dates


def _num(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def json_candidate_extras(results: Results):
    """``extras(s, c)`` → the candidate's added JSON fields; the covariances computed block by block."""
    cache: dict[int, np.ndarray] = {}

    def extras(s: int, c: int, ok: bool) -> dict:
        k = results.candidates[c].complexity
        family = results.family_of(c)
        if not ok:
            return {"basis": None, "sigma2": None, "df": None, "cov_unscaled": None}
        block = s // BLOCK
        if block not in cache:
            cache.clear()
            cache[block] = covariances(results, np.arange(block * BLOCK, min((block + 1) * BLOCK, results.n_series)))
        cov = cache[block][s - block * BLOCK, c, :k, :k]
        return {"basis": {"x": family.regressor, "mid": _num(results.basis_mid[s, c]),
                          "half": _num(results.basis_half[s, c]),
                          "coef": [_num(v) for v in np.asarray(results.coef[s, c, :k])]},
                "sigma2": _num(results.sigma2[s, c]), "df": int(results.df[s, c]),
                "cov_unscaled": [[_num(v) for v in row] for row in cov] if np.isfinite(cov).all() else None}
    return extras


def json_series_extras(results: Results, backtest=None):
    dates = last_dates(results)
    texts = None if dates is None else np.datetime_as_string(dates, unit="D")

    def extras(s: int) -> dict:
        out = {"last_date": None if texts is None or np.isnat(dates[s]) else str(texts[s])}
        if backtest is not None:
            out["backtest"] = backtest.record(s)
        return out
    return extras


def series_values(results: Results, backtest=None) -> dict:
    """What the Parquet columns take per series, made once for every series: ``days`` and ``missing`` (each
    series' last date as days since 1970, or missing), the ``backtest`` columns (name → (S,) values)."""
    dates = last_dates(results)
    n_s = results.n_series
    return {"days": np.zeros(n_s, np.int32) if dates is None else dates.view(np.int64).astype(np.int32),
            "missing": np.ones(n_s, bool) if dates is None else np.isnat(dates),
            "backtest": {} if backtest is None else backtest.columns()}


def parquet_columns(results: Results, lo: int, hi: int, values: dict) -> dict:
    """The added Parquet columns of series ``lo``…``hi - 1`` (one row per series × candidate); ``values``:
    ``series_values``."""
    import pyarrow as pa
    n_c = results.available.shape[1]
    ok = results.available[lo:hi].ravel()
    squares = np.asarray(results.lineup.complexity, dtype=np.int64) ** 2
    bases = np.concatenate(([0], np.cumsum(squares)))
    offsets = np.concatenate(([0], np.cumsum(np.where(ok, np.tile(squares, hi - lo), 0)))).astype(np.int64)
    flat = np.empty(offsets[-1])
    for start in range(lo, hi, BLOCK):
        block = np.arange(start, min(start + BLOCK, hi))
        # Each series' p × p matrices side by side, row by row, candidate after candidate; the available
        # candidates' entries picked in that order are the column's values, series after series (in
        # place where every candidate of the block is available, the usual case).
        first, last = offsets[(start - lo) * n_c], offsets[(start - lo + len(block)) * n_c]
        whole = bool(results.available[block].all())
        side = flat[first:last].reshape(len(block), -1) if whole else np.empty((len(block), bases[-1]))
        for c, cov in candidate_covariances(results, block):
            side[:, bases[c]:bases[c + 1]] = cov.reshape(len(block), -1)
        if not whole:
            flat[first:last] = side[np.repeat(results.available[block], squares, axis=1)]
    columns = {"sigma2": np.where(ok, np.asarray(results.sigma2[lo:hi], dtype=float).ravel(), np.nan),
               "df": from_numpy(np.asarray(results.df[lo:hi]).ravel().astype(np.int64), mask=~ok),
               "cov_unscaled": pa.ListArray.from_arrays(from_numpy(offsets.astype(np.int32)), from_numpy(flat))}
    columns["last_date"] = from_numpy(np.repeat(values["days"][lo:hi], n_c).astype(np.int32),
                                      mask=np.repeat(values["missing"][lo:hi], n_c)).cast(pa.date32())
    for name, column in values["backtest"].items():
        columns[f"backtest_{name}"] = _repeat_column(column[lo:hi], n_c)
    return columns


def _repeat_column(values: np.ndarray, n_c: int):
    """A per-series array repeated on each candidate's row: text (None → null), numbers (NaN → null),
    counts (-1 → null), booleans."""
    import pyarrow as pa
    if values.dtype == object:  # one dictionary entry per series, not one Python string per row (8× faster)
        import pyarrow.compute as pc
        words = texts(values)  # None → null
        missing = numbers(words.is_null())
        index = from_numpy(np.repeat(np.arange(len(values), dtype=np.int32), n_c), mask=np.repeat(missing, n_c))
        return pa.DictionaryArray.from_arrays(index, pc.fill_null(words, text("")))
    values = np.repeat(values, n_c)
    if values.dtype.kind in "iu":
        return from_numpy(values.astype(np.int64), mask=values < 0)
    return values


def header_extras(backtest=None) -> dict:
    return {} if backtest is None else {"ledger": backtest.source}
