"""Least-squares polynomials in a mapped variable, for many series and folds at once.

The caller maps the regressor into [-1, 1] per series and centres the
response.  Every fold's training Gram matrix comes from per-block power
sums (training = all blocks but the held-out one, or the blocks before it),
is Jacobi-scaled and Cholesky-factored once.  The leading k × k block of a
Cholesky factor is the factor of the leading k × k Gram block, so one
factorisation serves every degree.  On the [-1, 1] window the monomial
basis up to degree 5 has condition ≈ 43, so Gram matrices of well-spread
prices stay near 2e3; any fit whose Gram condition passes ``COND_LIMIT`` is
marked unavailable rather than reported with too few correct digits.

Held-out error comes from the same sums: yᵀy − 2βᵀXᵀy + βᵀXᵀXβ.  That
cancels when a fit is nearly exact, so a series with any fold whose error
is below ``CANCEL_RATIO`` of the terms it was computed from has its errors
recomputed from its rows.

Arrays are entry-first (see ``linalg``); the batch is (F + 1, S): fold
first, fold F being the fit on all rows.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .folds import FoldLayout
from .linalg import COND_LIMIT, back_solve, forward_solve, hankel_cholesky, leading_conditions
from .segments import segment_sums

CANCEL_RATIO = 1e-7


@dataclass(frozen=True, eq=False)
class FamilyFit:
    """Polynomial fits of one chunk: S series, F folds, D degrees, P = max degree + 1.

    - ``coef``: (D, P, F + 1, S) coefficients of powers of the mapped
      variable (zero past each degree), response centred; fold F = all rows.
    - ``ok``: (D, F + 1, S) the fit is determined and steady (full rank,
      condition under the limit; for the full fit, more rows than coefficients).
    - ``sse_test``: (D, F, S) weighted squared error on each fold's held-out rows.
    - ``w_test``: (F, S) held-out weight (row count when unweighted).
    - ``sse_full``: (D, S) weighted in-sample squared error.
    - ``w_full``, ``tss``, ``tss_test``: (S,) total weight, weighted sum of
      squares of the centred response, and the same over held-out rows.
    - ``lower``, ``scale``: (P, P, S), (P, S) the full fit's scaled Cholesky factor.
    """

    degrees: tuple[int, ...]
    coef: np.ndarray
    ok: np.ndarray
    sse_test: np.ndarray
    w_test: np.ndarray
    sse_full: np.ndarray
    w_full: np.ndarray
    tss: np.ndarray
    tss_test: np.ndarray
    lower: np.ndarray
    scale: np.ndarray


def block_sums(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, bounds: np.ndarray, p: int):
    """Per-block sums: Σw·xᵏ (k < 2p − 1), Σw·xᵏ·y (k < p), each (·, S, B); Σw·y² (S, B)."""
    power = np.ones_like(x) if w is None else w.copy()
    xy = y.copy() if w is None else w * y
    yy = segment_sums(xy * y, bounds)
    xs, xys = [], []
    for k in range(2 * p - 1):
        xs.append(segment_sums(power, bounds))
        if k < p:
            xys.append(segment_sums(xy, bounds))
            if k < p - 1:
                xy *= x
        if k < 2 * p - 2:
            power *= x
    return np.stack(xs), np.stack(xys), yy


def train_and_test(block: np.ndarray, lay: FoldLayout) -> tuple[np.ndarray, np.ndarray]:
    """From per-block sums (…, S, B): training sums (…, F + 1, S) (last = all rows), held-out (…, F, S)."""
    test = np.moveaxis(block[..., lay.held_out], -1, -2)
    total = block.sum(axis=-1)
    if lay.cumulative:
        train = np.moveaxis(np.cumsum(block, axis=-1)[..., lay.held_out - 1], -1, -2)
    else:
        train = total[..., None, :] - test
    return np.concatenate([train, total[..., None, :]], axis=-2), test


def fit_family(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, lay: FoldLayout,
               degrees: tuple[int, ...]) -> FamilyFit:
    """Fit every degree on every fold of every series in ``lay``.

    ``x``, ``y``, ``w``: (N,) rows in working order (``lay.bounds`` positions,
    starting at 0); ``x`` mapped into [-1, 1], ``y`` centred per series.
    """
    p = max(degrees) + 1
    xs, xys, yy = block_sums(x, y, w, lay.bounds, p)
    xs_train, xs_test = train_and_test(xs, lay)
    xys_train, xys_test = train_and_test(xys, lay)
    yy_test = yy[:, lay.held_out].T
    lower, scale, rank_ok = hankel_cholesky(xs_train, p)
    steady = leading_conditions(xs_train, lower, scale, [d + 1 for d in degrees]) <= COND_LIMIT
    z = forward_solve(lower, xys_train * scale)
    sc = scale[:, :-1]  # the folds' training scales, applied to their held-out sums
    train_rows = _train_rows(lay)
    counts = train_rows[-1]

    n_folds, n_series = xs_test.shape[1:]
    coef = np.zeros((len(degrees), p, n_folds + 1, n_series))
    ok = np.zeros((len(degrees), n_folds + 1, n_series), dtype=bool)
    sse_test = np.zeros((len(degrees), n_folds, n_series))
    sse_full = np.zeros((len(degrees), n_series))
    suspect = np.zeros(n_series, dtype=bool)
    for j, d in enumerate(degrees):
        size = d + 1
        beta = back_solve(lower, z, size)
        ok[j] = rank_ok[d] & steady[j] & (train_rows > d)
        ok[j, -1] &= counts > size
        coef[j, :size] = beta * scale[:size]
        b = beta[:, :-1] * sc[:size]  # unscaled fold coefficients
        cross = np.sum(b * xys_test[:size], axis=0)
        quad = np.zeros_like(cross)
        for i in range(size):
            quad += b[i] * (xs_test[2 * i] * b[i] + 2 * np.sum(xs_test[2 * i + 1:i + size] * b[i + 1:size], axis=0))
        sse = yy_test - 2 * cross + quad
        suspect |= np.any(ok[j, :-1] & (sse < CANCEL_RATIO * (yy_test + 2 * np.abs(cross) + quad)), axis=0)
        sse_test[j] = np.maximum(sse, 0.0)
        sse_full[j] = np.maximum(yy.sum(axis=1) - np.sum(z[:size, -1] ** 2, axis=0), 0.0)
    fit = FamilyFit(degrees, coef, ok, sse_test, xs_test[0], sse_full, xs_train[0, -1], yy.sum(axis=1),
                    yy_test.sum(axis=0), lower[:, :, -1], scale[:, -1])
    if suspect.any():
        _recompute_errors(x, y, w, lay, fit, np.flatnonzero(suspect))
    return fit


def _train_rows(lay: FoldLayout) -> np.ndarray:
    """(F + 1, S) rows each fit trains on (last = all rows)."""
    train, _ = train_and_test(np.diff(lay.bounds, axis=1), lay)
    return train


def horner(coef: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Σ coef[k]·xᵏ for ``coef`` (P, …), elementwise over the trailing axes."""
    out = np.zeros(np.broadcast_shapes(coef.shape[1:], np.shape(x)))
    for k in range(coef.shape[0] - 1, -1, -1):
        out = out * x + coef[k]
    return out


def row_blocks(bounds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(N,) series and block index of every working position."""
    sizes = np.diff(bounds, axis=1)
    n_series, n_blocks = sizes.shape
    series = np.repeat(np.arange(n_series), sizes.sum(axis=1))
    block = np.repeat(np.tile(np.arange(n_blocks), n_series), sizes.ravel())
    return series, block


def _recompute_errors(x, y, w, lay: FoldLayout, fit: FamilyFit, which: np.ndarray) -> None:
    """Held-out and in-sample errors of series ``which``, from their rows (no cancellation)."""
    series, block = row_blocks(lay.bounds)
    fold_of_block = np.full(lay.bounds.shape[1] - 1, -1)
    fold_of_block[lay.held_out] = np.arange(lay.n_folds)
    rows = np.flatnonzero(np.isin(series, which))
    s, f = series[rows], fold_of_block[block[rows]]
    tested = f >= 0
    weight = 1.0 if w is None else w[rows]
    n_series = fit.coef.shape[-1]
    for j in range(len(fit.degrees)):
        full = weight * (y[rows] - horner(fit.coef[j][:, -1, s], x[rows])) ** 2
        fit.sse_full[j, which] = np.bincount(s, full, minlength=n_series)[which]
        held = (weight * (y[rows] - horner(fit.coef[j][:, np.maximum(f, 0), s], x[rows])) ** 2)[tested]
        sums = np.zeros((lay.n_folds, n_series))
        np.add.at(sums, (f[tested], s[tested]), held)
        fit.sse_test[j][:, which] = sums[:, which]
