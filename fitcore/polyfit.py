"""Least-squares polynomials in a mapped variable, for many series and folds at once.

The caller maps the regressor into [-1, 1] per series and centres the
response; here every fold's training Gram matrix comes from per-block power
sums (training = all blocks but the held-out one, or the blocks before it),
is Jacobi-scaled and Cholesky-factored once.  The leading k × k block of a
Cholesky factor is the factor of the leading k × k Gram block, so one
factorisation serves every degree.  On the [-1, 1] window the monomial
basis up to degree 5 has condition ≈ 43, so the Gram matrices stay below
≈ 2e3 and the solves keep ≥ 12 significant digits.

Held-out error comes from the same sums: yᵀy − 2βᵀXᵀy + βᵀXᵀXβ.  That
cancels when a fit is nearly exact, so any fold whose error is below
``CANCEL_RATIO`` of the terms it was computed from is recomputed from its
rows directly.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .folds import FoldLayout
from .linalg import COND_LIMIT, back_solve, forward_solve, gram_condition, scaled_cholesky
from .segments import segment_sums

CANCEL_RATIO = 1e-7


@dataclass(frozen=True, eq=False)
class FamilyFit:
    """Polynomial fits of one chunk: S series, F folds, D degrees, P = max degree + 1.

    Index F along the fold axis is the fit on all rows.

    - ``coef``: (S, F + 1, D, P) coefficients of powers of the mapped
      variable (zero past each degree), response centred.
    - ``ok``: (S, F + 1, D) bool, the fit is determined (full rank, and for
      the full fit more rows than coefficients).
    - ``sse_test``: (S, F, D) weighted squared error on each fold's held-out rows.
    - ``w_test``: (S, F) held-out weight (row count when unweighted).
    - ``sse_full``: (S, D) weighted in-sample squared error.
    - ``w_full``: (S,) total weight; ``tss``: (S,) weighted sum of squares of the
      (centred) response; ``tss_test``: (S,) the same over rows that some fold holds out.
    - ``lower``, ``scale``: (S, P, P), (S, P) the full fit's scaled Cholesky factor.
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
    """Per-block power sums: Σw·xᵏ (k < 2p − 1), Σw·xᵏ·y (k < p), Σw·y², each (S, B, ·)."""
    power = np.ones_like(x) if w is None else w.copy()
    xy = y.copy() if w is None else w * y
    yy = segment_sums(xy * y, bounds)
    xs, xys = [], []
    for k in range(2 * p - 1):
        xs.append(segment_sums(power, bounds))
        if k < p:
            xys.append(segment_sums(xy, bounds))
            xy *= x
        power *= x
    return np.stack(xs, -1), np.stack(xys, -1), yy


def train_and_test(block: np.ndarray, lay: FoldLayout) -> tuple[np.ndarray, np.ndarray]:
    """(S, F + 1, …) training sums (last = all rows) and (S, F, …) held-out sums."""
    total = block.sum(axis=1)
    test = block[:, lay.held_out]
    if lay.cumulative:
        train = np.cumsum(block, axis=1)[:, lay.held_out - 1]
    else:
        train = total[:, None] - test
    return np.concatenate([train, total[:, None]], axis=1), test


def _hankel(power_sums: np.ndarray, p: int) -> np.ndarray:
    index = np.add.outer(np.arange(p), np.arange(p))
    return power_sums[..., index]


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
    yy_test = yy[:, lay.held_out]
    gram = _hankel(xs_train, p)
    lower, scale, rank_ok = scaled_cholesky(gram)
    steady = gram_condition(gram * scale[..., :, None] * scale[..., None, :], lower,
                            [d + 1 for d in degrees]) <= COND_LIMIT
    z = forward_solve(lower, xys_train * scale)
    gram_test = _hankel(xs_test, p) * scale[:, :-1, :, None] * scale[:, :-1, None, :]
    xy_test = xys_test * scale[:, :-1]
    w_train = xs_train[..., 0]

    n_series, n_fits = gram.shape[:2]
    coef = np.zeros((n_series, n_fits, len(degrees), p))
    ok = np.zeros((n_series, n_fits, len(degrees)), dtype=bool)
    sse_test = np.zeros((n_series, n_fits - 1, len(degrees)))
    suspect = np.zeros(n_series, dtype=bool)
    counts = np.diff(lay.bounds[:, [0, -1]], axis=1)[:, 0]
    train_rows = _train_rows(lay, counts)
    for j, d in enumerate(degrees):
        beta = back_solve(lower, z, d + 1)
        ok[..., j] = rank_ok[..., d] & steady[..., j] & (train_rows > d)
        ok[:, -1, j] &= counts > d + 1
        coef[..., j, :d + 1] = beta * scale[..., :d + 1]
        b = beta[:, :-1]
        cross = np.einsum("sfi,sfi->sf", b, xy_test[..., :d + 1])
        quad = np.einsum("sfi,sfij,sfj->sf", b, gram_test[..., :d + 1, :d + 1], b)
        sse = yy_test - 2 * cross + quad
        size = yy_test + 2 * np.abs(cross) + quad
        suspect |= np.any(ok[:, :-1, j] & (sse < CANCEL_RATIO * size), axis=1)
        sse_test[..., j] = np.maximum(sse, 0.0)
    tss = yy.sum(axis=1)
    sse_full = np.maximum(tss[:, None] - np.stack(
        [np.einsum("si,si->s", z[:, -1, :d + 1], z[:, -1, :d + 1]) for d in degrees], axis=-1), 0.0)
    if suspect.any():
        _recompute_held_out(x, y, w, lay, coef, np.flatnonzero(suspect), sse_test, sse_full)
    return FamilyFit(degrees, coef, ok, sse_test, xs_test[..., 0], sse_full, xs_train[:, -1, 0], tss,
                     yy_test.sum(axis=1),
                     lower[:, -1], scale[:, -1])


def _train_rows(lay: FoldLayout, counts: np.ndarray) -> np.ndarray:
    """(S, F + 1) rows each fit trains on (last = all rows)."""
    sizes = np.diff(lay.bounds, axis=1)
    test = sizes[:, lay.held_out]
    train = np.cumsum(sizes, axis=1)[:, lay.held_out - 1] if lay.cumulative else counts[:, None] - test
    return np.concatenate([train, counts[:, None]], axis=1)


def horner(coef: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Σ coef[..., k]·xᵏ, elementwise over the leading axes."""
    out = np.zeros(np.broadcast_shapes(coef.shape[:-1], x.shape))
    for k in range(coef.shape[-1] - 1, -1, -1):
        out = out * x + coef[..., k]
    return out


def row_blocks(bounds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(N,) series and block index of every working position."""
    sizes = np.diff(bounds, axis=1)
    n_series, n_blocks = sizes.shape
    series = np.repeat(np.arange(n_series), sizes.sum(axis=1))
    block = np.repeat(np.tile(np.arange(n_blocks), n_series), sizes.ravel())
    return series, block


def _recompute_held_out(x, y, w, lay, coef, which, sse_test, sse_full) -> None:
    """Held-out and in-sample errors of series ``which`` from their rows (no cancellation)."""
    series, block = row_blocks(lay.bounds)
    fold_of_block = np.full(lay.bounds.shape[1] - 1, -1)
    fold_of_block[lay.held_out] = np.arange(lay.n_folds)
    rows = np.flatnonzero(np.isin(series, which))
    s, f = series[rows], fold_of_block[block[rows]]
    weight = 1.0 if w is None else w[rows]
    for j in range(len(coef[0, 0])):
        full = weight * (y[rows] - horner(coef[s, -1, j], x[rows])) ** 2
        sse_full[which, j] = np.bincount(s, full, minlength=len(sse_full))[which]
        tested = f >= 0
        held = weight * (y[rows] - horner(coef[s, np.maximum(f, 0), j], x[rows])) ** 2
        sums = np.zeros(sse_test.shape[:2])
        np.add.at(sums, (s[tested], f[tested]), held[tested])
        sse_test[which, :, j] = sums[which]
