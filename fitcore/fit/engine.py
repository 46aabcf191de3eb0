"""fit_batch: every candidate, every fold, every series, in a few array passes.

Series are processed in chunks of whole series (about ``CHUNK_ROWS`` rows)
so that work arrays stay cache-sized; within a chunk nothing loops over
series in Python.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from ..data.dataset import Dataset
from . import kernels
from . import reasons as R
from .basis import mapped, plain_loglog, window, window_rows
from .candidates import candidates_for, complexity
from .folds import FoldLayout, layout
from .loglog import fit_loglog
from .loo import leverages, loo_residuals
from .polyfit import fit_family
from .prediction import best_revenue_loglog, best_revenue_poly, loglog_at, poly_at
from .results import Results
from .segments import segment_sums
from .selection import choose
from .settings import FitSettings, check_time_order

CHUNK_ROWS = 1 << 17


def fit_batch(data: Dataset, settings: FitSettings = FitSettings(), *, plan_price=None,
              progress: Callable[[int, int], None] | None = None) -> Results:
    """Fit, cross-validate and choose a curve for every series of ``data``.

    ``plan_price``: None, one price for every series, or an (S,) array with
    NaN where a series has no plan.  ``progress(done, total)`` is called after
    each chunk with counts of series.
    """
    check_time_order(settings.fold_order, data.date is not None)
    n_series = data.n_series
    plan = np.full(n_series, np.nan) if plan_price is None else np.broadcast_to(
        np.asarray(plan_price, dtype=np.float64), (n_series,)).copy()
    cands = candidates_for(settings)
    merged = None
    cuts = _chunk_cuts(data.offsets)
    fold_rows = data.counts if settings.folds == "loo" else np.full(n_series, int(settings.folds))
    fold_start = np.concatenate(([0], np.cumsum(fold_rows))).astype(np.int64)
    for lo, hi in zip(cuts[:-1], cuts[1:]):
        part = _fit_chunk(data, lo, hi, settings, cands, plan[lo:hi])
        if merged is None:  # one allocation per output, filled chunk by chunk
            merged = {name: np.empty((_total(name, n_series, data.n_rows, int(fold_start[-1])),) + value.shape[1:],
                                     dtype=value.dtype) for name, value in part.items()}
        for name, value in part.items():
            merged[name][_span(name, lo, hi, data.offsets, fold_start)] = value
        if progress is not None:
            progress(hi, n_series)
    return Results.build(data, settings, cands, plan, merged)


def _total(name: str, n_series: int, n_rows: int, n_folds: int) -> int:
    return n_folds if name == "fold_err" else n_series


def _span(name: str, lo: int, hi: int, offsets: np.ndarray, fold_start: np.ndarray) -> slice:
    if name == "fold_err":
        return slice(int(fold_start[lo]), int(fold_start[hi]))
    return slice(lo, hi)


def _chunk_cuts(offsets: np.ndarray) -> list[int]:
    n_series = len(offsets) - 1
    if n_series == 0:
        return [0]
    marks = np.searchsorted(offsets, np.arange(CHUNK_ROWS, offsets[-1], CHUNK_ROWS), side="left")
    return sorted({0, n_series, *np.clip(marks, 1, n_series).tolist()})


class _Chunk:
    """Working arrays of one chunk of whole series, rows in fold (working) order."""

    def __init__(self, data: Dataset, s0: int, s1: int, settings: FitSettings) -> None:
        r0, r1 = int(data.offsets[s0]), int(data.offsets[s1])
        self.offsets = data.offsets[s0:s1 + 1] - r0
        self.counts = np.diff(self.offsets)
        self.loo = settings.folds == "loo"
        if self.loo:
            self.lay = FoldLayout(None, np.stack([self.offsets[:-1], self.offsets[1:]], axis=1),
                                  np.zeros(0, np.int64), False, self.counts >= 2)
        else:
            self.lay = layout(self.offsets, settings, key_hash=data.key_hash[s0:s1],
                              date=None if data.date is None else data.date[r0:r1])
        order = self.lay.order

        def take(array):
            if array is None:
                return None
            return array[r0:r1] if order is None else array[r0:r1][order]

        self.price, self.volume, self.weight = take(data.price), take(data.volume), take(data.weight)
        self.whole = np.stack([self.offsets[:-1], self.offsets[1:]], axis=1)
        w_sum = self.counts.astype(float) if self.weight is None else self.sums(self.weight)
        self.w_sum = np.where(w_sum > 0, w_sum, 1.0)
        self.weight_reason = np.zeros(len(self.counts), np.int8)  # a series its weights leave nothing to fit
        if self.weight is not None:
            with np.errstate(over="ignore", invalid="ignore"):
                big = self.sums(self.weight * self.volume * self.volume)  # bounds every weighted sum the fit forms
            self.weight_reason[~np.isfinite(w_sum) | ~np.isfinite(big)] = R.WEIGHT_OVERFLOW
            self.weight_reason[w_sum == 0] = R.NO_WEIGHT
        # Price mapped onto each series' window, volume centred (``basis.window_rows``).
        self.t, self.y, self.lo, self.hi, self.ybar, self.v_low = self.windowed(self.price, self.volume)

    def windowed(self, x: np.ndarray, y: np.ndarray, use: np.ndarray | None = None):
        """(t, centred y, lo, hi, mean y, least y); series outside ``use`` get zeros."""
        t, centred = np.empty(len(x)), np.empty(len(x))
        lo, hi, mean, least = (np.empty(len(self.counts)) for _ in range(4))
        window_rows(x, y, np.empty(0) if self.weight is None else self.weight, self.offsets,
                    np.empty(0, bool) if use is None else use, t, centred, lo, hi, mean, least)
        return t, centred, lo, hi, mean, least

    def per_row(self, values: np.ndarray) -> np.ndarray:
        return np.repeat(values, self.counts)

    def sums(self, values: np.ndarray) -> np.ndarray:
        return segment_sums(values, self.whole)[:, 0]


def _fit_chunk(data: Dataset, s0: int, s1: int, settings: FitSettings, cands, plan) -> dict:
    ch = _Chunk(data, s0, s1, settings)
    n_s, n_c, n_p = len(ch.counts), len(cands), len(settings.degrees)
    mid, half = window(ch.lo, ch.hi)
    t, y, ybar = ch.t, ch.y, ch.ybar
    poly = fit_family(t, y, ch.weight, ch.lay, settings.degrees)

    coef = np.zeros((n_s, n_c, max(settings.degrees) + 1))
    coef[:, :n_p] = poly.coef[:, -1]
    coef[:, :n_p, 0] += ybar[:, None]
    fit_ok = np.ones((n_s, n_c), dtype=bool)
    fit_ok[:, :n_p] = poly.ok[:, -1]
    fold_ok = np.ones((n_s, n_c), dtype=bool)
    fold_ok[:, :n_p] = _along_folds(poly.ok[:, :-1], np.logical_and)
    sse_full = np.zeros((n_s, n_c))
    sse_full[:, :n_p] = poly.sse_full
    not_positive = np.zeros(n_s, dtype=bool)

    ll = None
    if settings.loglog:
        positive = (ch.v_low > 0) & (ch.lo > 0)
        not_positive = ~positive
        with np.errstate(divide="ignore", invalid="ignore"):  # rows of series not all positive: skipped
            u, z, log_lo, log_hi, zbar, _ = ch.windowed(np.log(ch.price), np.log(ch.volume), positive)
        log_mid, log_half = window(log_lo, log_hi)
        ll = fit_loglog(u, z, ch.volume, ch.weight, ch.lay, ch.loo)
        coef[:, -1, :2] = ll.log.coef[:, -1, 0]
        coef[:, -1, 0] += zbar
        fit_ok[:, -1] = ll.log.ok[:, -1, 0]
        fold_ok[:, -1] = _along_folds(ll.log.ok[:, :-1, 0], np.logical_and)
        sse_full[:, -1] = ll.sse_full
    else:
        log_mid = log_half = np.zeros(n_s)

    if ch.loo:
        series = ch.per_row(np.arange(n_s))
        resid, defined = loo_residuals(t, y, ch.weight, series, poly)
        fold_err = np.empty((len(t), n_c))
        fold_err[:, :n_p] = resid.T ** 2
        fold_ok[:, :n_p] &= defined.T
        if ll is not None:
            fold_err[:, -1] = ll.sse_test
            fold_ok[:, -1] &= ll.defined
        cv_mse, cv_se, press = _loo_summary(ch, fold_err)
    else:
        sse_test = np.zeros((n_s, ch.lay.n_folds, n_c))
        sse_test[..., :n_p] = poly.sse_test
        if ll is not None:
            sse_test[..., -1] = ll.sse_test.T
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):  # unavailable cells: masked below
            fold_err = sse_test / poly.w_test[..., None]
            cv_mse, cv_se = _fold_mean_se(fold_err)
        press = _along_folds(sse_test)

    n_coef = complexity(cands)
    reason = _reasons(ch, cands, n_coef, half, not_positive, fit_ok, fold_ok)
    available = reason == R.NONE
    nan = np.nan
    with np.errstate(invalid="ignore", divide="ignore"):
        held_out_tss = poly.tss if ch.loo else poly.tss_test  # leave-one-out holds out every row
        q2 = np.where(available, 1 - press / held_out_tss[:, None], nan)
        r2 = np.where(available, 1 - sse_full / poly.tss[:, None], nan)
    cv_mse, cv_se = np.where(available, cv_mse, nan), np.where(available, cv_se, nan)
    chosen = choose(settings.rule, cv_mse, cv_se, available, n_coef, poly.tss / ch.w_sum)

    df = ch.counts[:, None] - n_coef[None, :]
    sigma2 = sse_full / np.maximum(df, 1)
    plan_cols = [np.full((n_s, n_c), nan) for _ in range(4)]
    if ll is not None:
        sigma2[:, -1] = ll.log.sse_full[:, 0] / np.maximum(df[:, -1], 1)
    at = np.flatnonzero(np.isfinite(plan))
    if len(at):
        with np.errstate(divide="ignore", invalid="ignore"):
            lev = leverages(mapped(plan[at], mid[at], half[at]), poly.lower[at], poly.scale[at])
            if ll is not None:
                log_lev = leverages(mapped(np.log(plan[at]), log_mid[at], log_half[at]),
                                    ll.log.lower[at], ll.log.scale[at])[1]
        for j, cand in enumerate(cands):
            if cand.family == "poly":
                values = poly_at(coef[at, j].T, mid[at], half[at], lev[cand.degree], sigma2[at, j], df[at, j],
                                 plan[at], settings.level)
            else:
                values = loglog_at(coef[at, j, :2].T, log_mid[at], log_half[at], log_lev, ll.smear[at],
                                   sigma2[at, j], df[at, j], plan[at], settings.level)
            for column, value in zip(plan_cols, values):
                column[at, j] = np.where(available[at, j], value, nan)

    revenue_price = np.full(n_s, nan)
    poly_rows = np.flatnonzero((chosen >= 0) & (chosen < n_p))
    if len(poly_rows):
        revenue_price[poly_rows] = best_revenue_poly(coef[poly_rows, chosen[poly_rows]].T, mid[poly_rows], half[poly_rows])
    if ll is not None:
        rows = np.flatnonzero(chosen == n_c - 1)
        _, elasticity = plain_loglog(coef[rows, -1, 0], coef[rows, -1, 1], log_mid[rows], log_half[rows])
        revenue_price[rows] = best_revenue_loglog(elasticity, ch.lo[rows], ch.hi[rows])
    log_part = (u, z, ll) if ll is not None else None
    top_cook, top_row = _top_influence(ch, chosen, cands, coef, sigma2, t, poly, log_part)
    keep = np.repeat(available, ch.counts, axis=0) if ch.loo else available[:, None, :]
    return dict(
        available=available, reason=reason, cv_mse=cv_mse, cv_se=cv_se, r2=r2, q2=q2,
        fold_err=np.where(keep, fold_err, nan).reshape(-1, n_c),
        n_folds=(ch.counts if ch.loo else np.full(n_s, ch.lay.n_folds)).astype(np.int64),
        price_lo=ch.lo, price_hi=ch.hi, mid=mid, half=half, log_mid=log_mid, log_half=log_half,
        coef=coef, smear=ll.smear if ll is not None else np.ones(n_s), sigma2=sigma2, df=df, chosen=chosen,
        plan_volume=plan_cols[0], plan_lo=plan_cols[1], plan_hi=plan_cols[2], plan_elasticity=plan_cols[3],
        revenue_price=revenue_price, top_cook=top_cook,
        top_row=np.where(top_row >= 0, top_row + int(data.offsets[s0]), -1),
    )


def _top_influence(ch: _Chunk, chosen, cands, coef, sigma2, t, poly, log_part):
    """Per series (S,): the largest Cook's distance of a row under the chosen curve (-1 when none)
    and the first chunk-relative dataset row holding it (-1 when none)."""
    n_s = len(ch.counts)
    top, first = np.full(n_s, -1.0), np.full(n_s, -1, dtype=np.int64)
    sizes = np.array([c.complexity for c in cands])
    is_poly = np.array([c.family == "poly" for c in cands])
    picked = np.maximum(chosen, 0)
    size = np.where(chosen >= 0, sizes[picked], 0)
    order = np.arange(len(t)) if ch.lay.order is None else ch.lay.order  # chunk-relative dataset rows
    weight = np.empty(0) if ch.weight is None else ch.weight
    offsets = ch.offsets.astype(np.int64)
    every = np.arange(n_s)
    kernels.influence_rows(t, ch.volume, weight, offsets, order, np.ascontiguousarray(coef[every, picked]),
                           np.where(is_poly[picked], size, 0), poly.lower, poly.scale,
                           sigma2[every, picked], top, first)
    if log_part is not None:
        u, z, ll = log_part
        kernels.influence_rows(u, z, weight, offsets, order, np.ascontiguousarray(ll.log.coef[:, -1, 0]),
                               np.where(chosen == len(cands) - 1, size, 0), ll.log.lower, ll.log.scale,
                               sigma2[:, -1], top, first)
    return top, first


def _along_folds(values: np.ndarray, ufunc=np.add) -> np.ndarray:
    """``ufunc`` reduced along axis 1 of (S, K, …) ``values``, a fold at a time.

    A loop over the few folds on contiguous (S, …) slices: numpy's reductions along a short
    middle axis cost several times more here.
    """
    if values.shape[1] == 0:
        return ufunc.reduce(values, axis=1)  # the identity: 0 for sums, True for "all"
    out = values[:, 0].copy()
    for f in range(1, values.shape[1]):
        ufunc(out, values[:, f], out=out)
    return out


def _fold_mean_se(fold_err: np.ndarray):
    """Mean and standard error (sample SD, ddof = 1, over √K) of (S, K, C) fold errors along K."""
    n_folds = fold_err.shape[1]
    mean = _along_folds(fold_err) / n_folds
    spread = _along_folds((fold_err - mean[:, None]) ** 2)
    return mean, np.sqrt(spread / (n_folds - 1)) / np.sqrt(n_folds)


def _loo_summary(ch: _Chunk, fold_err: np.ndarray):
    """Mean, standard error and weighted sum of per-row leave-one-out squared errors, per series × candidate."""
    n_c = fold_err.shape[1]
    bounds = _tile_bounds(ch.offsets, n_c)

    def per_series(values):
        return segment_sums(values.T.ravel(), bounds).reshape(n_c, -1).T

    n = np.maximum(ch.counts, 1)[:, None].astype(float)
    with np.errstate(invalid="ignore", over="ignore"):  # unavailable cells may hold inf; they are masked later
        mean = per_series(fold_err) / n
        spread = per_series((fold_err - np.repeat(mean, ch.counts, axis=0)) ** 2)
    se = np.sqrt(spread / np.maximum(n - 1, 1) / n)
    press = per_series(fold_err if ch.weight is None else fold_err * ch.weight[:, None])
    return mean, se, press


def _reasons(ch: _Chunk, cands, n_coef, half, not_positive, fit_ok, fold_ok) -> np.ndarray:
    """(S, C) int8 reason codes, the first that applies in this order."""
    degrees = np.array([c.degree if c.family == "poly" else 1 for c in cands])
    is_loglog = np.array([c.family == "loglog" for c in cands])
    rules = [
        ((ch.weight_reason > 0)[:, None], ch.weight_reason[:, None]),
        (not_positive[:, None] & is_loglog[None, :], R.NOT_POSITIVE),
        (~ch.lay.usable[:, None], R.TOO_FEW_FOR_FOLDS),
        ((half <= 0)[:, None] & (degrees > 0)[None, :], R.FLAT_PRICE),
        (ch.counts[:, None] <= n_coef[None, :], R.TOO_FEW_POINTS),
        (~fit_ok, R.RANK_ALL),
        (~fold_ok, R.LEVERAGE_ONE if ch.loo else R.RANK_FOLD),
    ]
    reason = np.zeros(fit_ok.shape, dtype=np.int8)
    for applies, code in reversed(rules):
        mask = np.broadcast_to(applies, reason.shape)
        reason[mask] = np.broadcast_to(code, reason.shape)[mask]
    return reason


def _tile_bounds(offsets: np.ndarray, copies: int) -> np.ndarray:
    """Segment bounds for ``copies`` stacked copies of a row array split at ``offsets``."""
    n = offsets[-1]
    starts = (offsets[:-1][None, :] + n * np.arange(copies)[:, None]).ravel()
    return np.stack([starts, starts + np.tile(np.diff(offsets), copies)], axis=1)
