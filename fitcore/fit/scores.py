"""From held-out errors to scores: mean CV error, its standard error, PRESS, and the sums they are judged by.

Every family hands over its held-out squared errors in volume units, per
fold (S, K, C) or, for leave-one-out, per row (N, C); the fold scheme
(``folds``) says which summary applies.  Q² divides PRESS by the held-out
rows' total sum of squares, R² the in-sample error by the series' own.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compiled import compiled, readonly
from .segments import segment_sums


@dataclass(frozen=True, eq=False)
class Scores:
    """Cross-validation of one chunk's cells (S series × C candidates).

    ``fold_err``: (S, K, C) weighted held-out MSE of each fold, or (N, C) the
    squared error of each left-out row; ``cv_mse``, ``cv_se``, ``press``
    (Σ weighted held-out squared errors): (S, C); ``held_tss``: (S,) the
    weighted sum of squares of the held-out rows about the series' mean.
    """

    fold_err: np.ndarray
    cv_mse: np.ndarray
    cv_se: np.ndarray
    press: np.ndarray
    held_tss: np.ndarray


@dataclass(frozen=True, eq=False)
class Moments:
    """Weighted sums of one chunk's centred volume y: ``w_test`` (S, K) each fold's held-out weight,
    ``tss`` (S,) Σw·y², ``tss_test`` (S,) Σw·y² over the rows some fold holds out."""

    w_test: np.ndarray
    tss: np.ndarray
    tss_test: np.ndarray


def moments(y: np.ndarray, w: np.ndarray | None, bounds: np.ndarray, held_out: np.ndarray) -> Moments:
    """``Moments`` of rows in working order cut into blocks ``bounds`` (S, B + 1); fold f holds out block
    ``held_out[f]``.  Summed block by block in row order, as the polynomial fits sum them."""
    n_s = len(bounds)
    out = Moments(np.empty((n_s, len(held_out))), np.empty(n_s), np.empty(n_s))
    block_moments(readonly(y), readonly(np.empty(0) if w is None else w), readonly(bounds),
                  readonly(held_out.astype(np.int64)), out.w_test, out.tss, out.tss_test)
    return out


@compiled
def block_moments(y, w, bounds, held_out, w_test, tss, tss_test):
    weighted = len(w) > 0
    n_blocks = bounds.shape[1] - 1
    block_w = np.zeros(n_blocks)
    block_yy = np.zeros(n_blocks)
    for s in range(bounds.shape[0]):
        for b in range(n_blocks):
            total_w = 0.0
            yy = 0.0
            for i in range(bounds[s, b], bounds[s, b + 1]):
                wi = w[i] if weighted else 1.0
                wy = wi * y[i]
                total_w += wi
                yy += wy * y[i]
            block_w[b] = total_w
            block_yy[b] = yy
        total = 0.0
        for b in range(n_blocks):
            total += block_yy[b]
        held = 0.0
        for f in range(len(held_out)):
            w_test[s, f] = block_w[held_out[f]]
            held += block_yy[held_out[f]]
        tss[s] = total
        tss_test[s] = held


def along_folds(values: np.ndarray, ufunc=np.add) -> np.ndarray:
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


def fold_scores(sse_test: np.ndarray, mom: Moments) -> Scores:
    """K folds: ``sse_test`` (S, K, C) weighted held-out squared errors of each fold."""
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):  # unavailable cells: masked later
        fold_err = sse_test / mom.w_test[..., None]
        n_folds = fold_err.shape[1]
        mean = along_folds(fold_err) / n_folds
        spread = along_folds((fold_err - mean[:, None]) ** 2)
        se = np.sqrt(spread / (n_folds - 1)) / np.sqrt(n_folds)
    return Scores(fold_err, mean, se, along_folds(sse_test), mom.tss_test)


def row_scores(errors: np.ndarray, offsets: np.ndarray, w: np.ndarray | None, mom: Moments) -> Scores:
    """Leave-one-out: ``errors`` (N, C) the squared error of each row when left out; series s owns rows
    ``offsets[s]:offsets[s + 1]``.  Every row is held out once, so Q² is over all of them."""
    n_c = errors.shape[1]
    counts = np.diff(offsets)
    bounds = _tile_bounds(offsets, n_c)

    def per_series(values):
        return segment_sums(values.T.ravel(), bounds).reshape(n_c, -1).T

    if w is not None:
        return _weighted_row_scores(errors, offsets, w, per_series, mom)
    n = np.maximum(counts, 1)[:, None].astype(float)
    with np.errstate(invalid="ignore", over="ignore"):  # unavailable cells may hold inf; they are masked later
        mean = per_series(errors) / n
        spread = per_series((errors - np.repeat(mean, counts, axis=0)) ** 2)
    se = np.sqrt(spread / np.maximum(n - 1, 1) / n)
    press = per_series(errors)
    return Scores(errors, mean, se, press, mom.tss)


def _weighted_row_scores(errors, offsets, w, per_series, mom: Moments) -> Scores:
    """Leave-one-out with weights: the weighted mean of the held-out squared errors, m = Σw·e²/Σw, and
    its standard error √(n/(n − 1)·Σw²(e² − m)²)/Σw over the n rows of positive weight (with equal
    weights, the unweighted mean and sd/√n); a row of weight 0 counts for nothing, whatever its error."""
    whole = np.stack([offsets[:-1], offsets[1:]], axis=1)
    total = segment_sums(w, whole)
    n = segment_sums((w > 0).astype(np.float64), whole)
    total = np.where(total > 0, total, 1.0)
    zero = np.flatnonzero(w == 0)
    weight = w[:, None]
    with np.errstate(invalid="ignore", over="ignore"):  # unavailable cells may hold inf; they are masked later
        weighted = weight * errors
        weighted[zero] = 0.0  # 0·inf would be NaN
        press = per_series(weighted)
        mean = press / total
        apart = weight * (errors - np.repeat(mean, np.diff(offsets), axis=0))
        apart[zero] = 0.0
        se = np.sqrt(per_series(apart * apart) * n / np.maximum(n - 1, 1)) / total
    return Scores(errors, mean, se, press, mom.tss)


def _tile_bounds(offsets: np.ndarray, copies: int) -> np.ndarray:
    """Segment bounds for ``copies`` stacked copies of a row array split at ``offsets``."""
    n = offsets[-1]
    starts = (offsets[:-1][None, :] + n * np.arange(copies)[:, None]).ravel()
    return np.stack([starts, starts + np.tile(np.diff(offsets), copies)], axis=1)
