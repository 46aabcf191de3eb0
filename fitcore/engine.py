"""fit_batch: every candidate, every fold, every series, in a few array passes.

Series are processed in chunks of whole series (about ``CHUNK_ROWS`` rows)
so that work arrays stay cache-sized; within a chunk nothing loops over
series in Python.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from . import reasons as R
from .basis import to_window, window
from .candidates import candidates_for, complexity
from .dataset import Dataset
from .folds import FoldLayout, layout
from .loglog import fit_loglog
from .loo import loo_residuals
from .polyfit import fit_family
from .prediction import best_revenue_loglog, best_revenue_poly, loglog_at, poly_at
from .results import Results
from .segments import segment_sums
from .selection import choose
from .settings import FitSettings

CHUNK_ROWS = 1 << 17


def fit_batch(data: Dataset, settings: FitSettings = FitSettings(), *, plan_price=None,
              progress: Callable[[int, int], None] | None = None) -> Results:
    """Fit, cross-validate and choose a curve for every series of ``data``.

    ``plan_price``: None, one price for every series, or an (S,) array with
    NaN where a series has no plan.  ``progress(done, total)`` is called after
    each chunk with counts of series.
    """
    if settings.fold_order == "time" and data.date is None:
        from .errors import SettingsError
        raise SettingsError("--fold-order time needs a date column (--date COLUMN)")
    n_series = data.n_series
    plan = np.full(n_series, np.nan) if plan_price is None else np.broadcast_to(
        np.asarray(plan_price, dtype=np.float64), (n_series,)).copy()
    cands = candidates_for(settings)
    parts = []
    cuts = _chunk_cuts(data.offsets)
    for lo, hi in zip(cuts[:-1], cuts[1:]):
        parts.append(_fit_chunk(data, lo, hi, settings, cands, plan[lo:hi]))
        if progress is not None:
            progress(hi, n_series)
    merged = {name: np.concatenate([part[name] for part in parts]) if parts else None for name in (parts[0] if parts else {})}
    return Results.build(data, settings, cands, plan, merged)


def _chunk_cuts(offsets: np.ndarray) -> list[int]:
    n_series = len(offsets) - 1
    if n_series == 0:
        return [0]
    marks = np.searchsorted(offsets, np.arange(CHUNK_ROWS, offsets[-1], CHUNK_ROWS), side="left")
    return sorted({0, n_series, *np.clip(marks, 1, n_series).tolist()})


def _fit_chunk(data: Dataset, s0: int, s1: int, settings: FitSettings, cands, plan) -> dict:
    r0, r1 = int(data.offsets[s0]), int(data.offsets[s1])
    offsets = data.offsets[s0:s1 + 1] - r0
    counts = np.diff(offsets)
    loo = settings.folds == "loo"
    if loo:
        lay = FoldLayout(None, np.stack([offsets[:-1], offsets[1:]], axis=1), np.zeros(0, np.int64), False, counts >= 2)
    else:
        lay = layout(offsets, settings, key_hash=data.key_hash[s0:s1],
                     date=None if data.date is None else data.date[r0:r1])
    rows = slice(r0, r1)
    take = (lambda a: None if a is None else a[rows]) if lay.order is None else (lambda a: None if a is None else a[rows][lay.order])
    price, volume, weight = take(data.price), take(data.volume), take(data.weight)
    whole = np.stack([offsets[:-1], offsets[1:]], axis=1)

    lo = np.minimum.reduceat(price, offsets[:-1]) if len(price) else np.zeros(0)
    hi = np.maximum.reduceat(price, offsets[:-1]) if len(price) else np.zeros(0)
    mid, half = window(lo, hi)
    t = to_window(price, np.repeat(mid, counts), np.repeat(half, counts))
    w_sum = counts.astype(float) if weight is None else segment_sums(weight, whole)[:, 0]
    safe_w = np.where(w_sum > 0, w_sum, 1.0)
    ybar = segment_sums(volume if weight is None else weight * volume, whole)[:, 0] / safe_w
    y = volume - np.repeat(ybar, counts)
    poly = fit_family(t, y, weight, lay, settings.degrees)

    n_c, n_p = len(cands), len(settings.degrees)
    out_shape = (len(counts), n_c)
    sse_full = np.zeros(out_shape)
    sse_full[:, :n_p] = poly.sse_full
    tss = poly.tss
    reason = np.zeros(out_shape, dtype=np.int8)
    fit_ok = np.zeros(out_shape, dtype=bool)
    fit_ok[:, :n_p] = poly.ok[:, -1]
    fold_ok = np.ones(out_shape, dtype=bool)
    fold_ok[:, :n_p] = poly.ok[:, :-1].all(axis=1)
    coef = np.zeros((len(counts), n_c, max(settings.degrees) + 1))
    coef[:, :n_p] = poly.coef[:, -1]
    coef[:, :n_p, 0] += ybar[:, None]

    if settings.loglog:
        positive = (np.minimum.reduceat(volume, offsets[:-1]) > 0) & (lo > 0) if len(price) else np.zeros(0, bool)
        pos_rows = np.repeat(positive, counts)
        log_price = np.log(np.where(pos_rows, price, 1.0))
        log_volume = np.log(np.where(pos_rows, volume, 1.0))
        lmid, lhalf = window(np.log(np.where(positive, lo, 1.0)), np.log(np.where(positive, hi, 1.0)))
        u = to_window(log_price, np.repeat(lmid, counts), np.repeat(lhalf, counts))
        zbar = segment_sums(log_volume if weight is None else weight * log_volume, whole)[:, 0] / safe_w
        ll = fit_loglog(u, log_volume - np.repeat(zbar, counts), volume, weight, lay, loo)
        sse_full[:, -1] = ll.sse_full
        fit_ok[:, -1] = ll.log.ok[:, -1, 0] & positive
        fold_ok[:, -1] = ll.log.ok[:, :-1, 0].all(axis=1)
        coef[:, -1, :2] = ll.log.coef[:, -1, 0, :2]
        coef[:, -1, 0] += zbar
        reason[:, -1] = np.where(positive, 0, R.NOT_POSITIVE)
    else:
        ll, positive = None, np.zeros(len(counts), bool)

    if loo:
        series = np.repeat(np.arange(len(counts)), counts)
        resid, defined = loo_residuals(t, y, weight, series, poly)
        per_row = np.empty((len(t), n_c))
        per_row[:, :n_p] = resid ** 2
        fold_ok[:, :n_p] &= defined
        if ll is not None:
            per_row[:, -1] = ll.sse_test
            fold_ok[:, -1] &= ll.defined
        fold_err = per_row
        n_folds = counts.astype(float)
        w_rows = np.ones_like(t) if weight is None else weight
        bounds = _tile_bounds(offsets, n_c)
        per_series = lambda values: segment_sums(values.T.ravel(), bounds).reshape(n_c, -1).T  # noqa: E731
        cv_mse = per_series(per_row) / np.maximum(n_folds, 1)[:, None]
        spread = per_series((per_row - np.repeat(cv_mse, counts, axis=0)) ** 2)
        cv_se = np.sqrt(spread / np.maximum(n_folds - 1, 1)[:, None] / np.maximum(n_folds, 1)[:, None])
        press = per_series(per_row * w_rows[:, None])
        tss_test = tss
    else:
        sse_test = np.zeros((len(counts), lay.n_folds, n_c))
        sse_test[..., :n_p] = poly.sse_test
        if ll is not None:
            sse_test[..., -1] = ll.sse_test
        w_test = poly.w_test
        with np.errstate(invalid="ignore", divide="ignore"):
            fold_err = sse_test / w_test[..., None]
        cv_mse = fold_err.mean(axis=1)
        cv_se = fold_err.std(axis=1, ddof=1) / np.sqrt(lay.n_folds)
        press = sse_test.sum(axis=1)
        tss_test = poly.tss_test

    usable = lay.usable
    flat = half <= 0
    degrees = np.array([c.degree if c.family == "poly" else 1 for c in cands])
    n_coef = complexity(cands)
    reason = np.where(reason != 0, reason, np.where(~usable[:, None], R.TOO_FEW_FOR_FOLDS, 0))
    reason = np.where(reason != 0, reason, np.where(flat[:, None] & (degrees > 0)[None, :], R.FLAT_PRICE, 0))
    reason = np.where(reason != 0, reason, np.where(counts[:, None] <= n_coef[None, :], R.TOO_FEW_POINTS, 0))
    reason = np.where(reason != 0, reason, np.where(~fit_ok, R.RANK_ALL, 0))
    reason = np.where(reason != 0, reason, np.where(~fold_ok, R.LEVERAGE_ONE if loo else R.RANK_FOLD, 0))
    available = reason == 0

    with np.errstate(invalid="ignore", divide="ignore"):
        q2 = 1 - press / tss_test[:, None]
        r2 = 1 - sse_full / tss[:, None]
    nan = np.nan
    cv_mse = np.where(available, cv_mse, nan)
    cv_se = np.where(available, cv_se, nan)
    q2, r2 = np.where(available, q2, nan), np.where(available, r2, nan)
    variance = tss / safe_w
    chosen = choose(settings.rule, cv_mse, cv_se, available, n_coef, variance)

    df = counts[:, None] - n_coef[None, :]
    sigma2 = np.zeros(out_shape)
    sigma2[:, :n_p] = sse_full[:, :n_p] / np.maximum(df[:, :n_p], 1)
    plan_cols = [np.full(out_shape, nan) for _ in range(4)]
    for j, cand in enumerate(cands):
        if cand.family == "poly":
            values = poly_at(coef[:, j], mid, half, poly.lower, poly.scale, cand.degree + 1,
                             sigma2[:, j], df[:, j], plan, settings.level)
        else:
            sigma2[:, j] = ll.log.sse_full[:, 0] / np.maximum(df[:, j], 1)
            values = loglog_at(coef[:, j], lmid, lhalf, ll.log.lower, ll.log.scale, ll.smear,
                               sigma2[:, j], df[:, j], plan, settings.level)
        for col, value in zip(plan_cols, values):
            col[:, j] = np.where(available[:, j], value, nan)

    revenue_price = np.full(len(counts), nan)
    has = chosen >= 0
    picked = np.where(has, chosen, 0)
    is_poly = has & (picked < n_p)
    if is_poly.any():
        idx = np.flatnonzero(is_poly)
        revenue_price[idx] = best_revenue_poly(coef[idx, picked[idx]], mid[idx], half[idx])
    if ll is not None:
        idx = np.flatnonzero(has & (picked == n_c - 1))
        revenue_price[idx] = best_revenue_loglog(coef[idx, -1, 1] / np.where(lhalf[idx] > 0, lhalf[idx], 1), lo[idx], hi[idx])
    return dict(
        available=available, reason=reason, cv_mse=cv_mse, cv_se=cv_se, r2=r2, q2=q2,
        fold_err=np.where(available[:, None, :] if not loo else np.repeat(available, counts, axis=0), fold_err, nan).reshape(-1, n_c),
        n_folds=(counts if loo else np.full(len(counts), lay.n_folds)).astype(np.int64),
        price_lo=lo, price_hi=hi, mid=mid, half=half,
        log_mid=lmid if ll is not None else np.zeros(len(counts)), log_half=lhalf if ll is not None else np.zeros(len(counts)),
        coef=coef, smear=ll.smear if ll is not None else np.ones(len(counts)),
        sigma2=sigma2, df=df, chosen=chosen,
        plan_volume=plan_cols[0], plan_lo=plan_cols[1], plan_hi=plan_cols[2], plan_elasticity=plan_cols[3],
        revenue_price=revenue_price,
    )


def _tile_bounds(offsets: np.ndarray, copies: int) -> np.ndarray:
    """Segment bounds for ``copies`` stacked copies of a row array split at ``offsets``."""
    n = offsets[-1]
    starts = (offsets[:-1][None, :] + n * np.arange(copies)[:, None]).ravel()
    return np.stack([starts, starts + np.tile(np.diff(offsets), copies)], axis=1)
