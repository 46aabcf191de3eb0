"""The basis every curve is fitted in, and the one way to evaluate it.

A family fits a polynomial in t = (x − mid) / half, where x is its regressor
(price, or ln price) and [mid − half, mid + half] the series' range of x:
the regressor mapped onto [-1, 1].  Coefficients of powers of t are what
the engine keeps.  Here: the window, the mapping, the polynomial's value and
derivatives (``horner``, the one evaluator), the leverage of a point under a
fit's scaled Cholesky factor (``leverage``, the one leverage), one series'
factor computed from its rows, and the re-expansion in powers of x itself
(plain coefficients) for display and export.
"""
from __future__ import annotations

from math import comb

import numpy as np

from ..compiled import compiled, readonly


def window(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(mid, half) of each [lo, hi]; half is 0 for a single price."""
    return (lo + hi) / 2, (hi - lo) / 2


def outside_prices(price, lo, hi):
    """Whether ``price`` lies outside [lo, hi] (numbers or arrays), to a part in 1e9: a signed curve's prices are
    its window's ends, through a logarithm and back for loglog (the backtest's count of rows since, carry's plan
    check and the shifted sentence all judge by this)."""
    return (price < lo - 1e-9 * abs(lo)) | (price > hi + 1e-9 * abs(hi))


def width(half: np.ndarray) -> np.ndarray:
    """The half-width to divide by: 1 where the window has no width (a single price)."""
    return np.where(half > 0, half, 1.0)


def mapped(x: np.ndarray, mid: np.ndarray, half: np.ndarray) -> np.ndarray:
    """x in the coordinate of its window: (x − mid) / half (half taken as 1 for a single price)."""
    return (x - mid) / width(half)


def power_coefficients(coef: np.ndarray, mid: np.ndarray, half: np.ndarray, powers: list | None = None) -> np.ndarray:
    """Coefficients of powers of price from coefficients of powers of t.

    ``coef``: (..., P) with Σ coef[k]·tᵏ, t = (price − mid)/half; ``mid``,
    ``half``: (...).  Returns (..., P) with Σ out[j]·priceʲ the same curve:
    out[j] = Σₖ coef[k]·C(k, j)·(−mid)^(k−j) / halfᵏ.  ``powers``: ``neg_powers(mid, ≥ P)``
    when the caller already has them (candidates sharing a window).
    """
    p = coef.shape[-1]
    half = np.where(half > 0, half, 1.0)[..., None]
    scaled = coef / half ** np.arange(p)
    powers = neg_powers(mid, p) if powers is None else powers
    terms = [scaled[..., k].copy() for k in range(p)]
    out = [np.zeros(scaled.shape[:-1]) for _ in range(p)]  # a contiguous array per power, stacked at the end
    for k in range(p):
        for j in range(k + 1):
            out[j] += terms[k] * comb(k, j) * powers[k - j]
    return np.stack(out, axis=-1) if p else np.zeros_like(scaled)


def neg_powers(mid: np.ndarray, p: int) -> list:
    """(−mid)ᵉ for e = 0 … p − 1, each computed once."""
    neg = -np.asarray(mid)
    return [neg ** e for e in range(p)]


@compiled
def window_rows(x, y, w, offsets, use, t, centred, lo, hi, mean, y_low, x_low):
    """Per series: price window [lo, hi] over its rows of positive weight (every row unweighted, or where
    none weighs more than 0: that series has no model), x mapped onto it (0 for a single price; a row of
    weight 0 priced outside it held at its edge, −1 or 1: it counts in no sum), y less its weighted ``mean``,
    the smallest y and the smallest x of those rows (every row's where none weighs more than 0).  Series with
    ``use[s]`` False (when ``use`` is not empty) get zeros throughout."""
    weighted = len(w) > 0
    restricted = len(use) > 0
    for s in range(len(offsets) - 1):
        start, stop = offsets[s], offsets[s + 1]
        if restricted and not use[s]:
            for i in range(start, stop):
                t[i] = 0.0
                centred[i] = 0.0
            lo[s] = hi[s] = mean[s] = y_low[s] = x_low[s] = 0.0
            continue
        small = np.inf
        large = -np.inf
        every_small = np.inf
        every_large = -np.inf
        least = np.inf
        every_least = np.inf
        total_w = 0.0
        total_wy = 0.0
        for i in range(start, stop):
            wi = w[i] if weighted else 1.0
            every_small = min(every_small, x[i])
            every_large = max(every_large, x[i])
            every_least = min(every_least, y[i])
            if wi > 0:  # a row of weight 0 is no observation: the window is the observed prices'
                small = min(small, x[i])
                large = max(large, x[i])
                least = min(least, y[i])
                total_w += wi
                total_wy += wi * y[i]
        if not small <= large:  # no row of positive weight (or a NaN weight): every row's
            small = every_small
            large = every_large
            least = every_least
        mid = (small + large) / 2
        half = (large - small) / 2
        average = total_wy / (total_w if total_w > 0 else 1.0)
        for i in range(start, stop):
            at = (x[i] - mid) / half if half > 0 else 0.0
            if weighted and not w[i] > 0:  # weighs nothing in any sum, but its powers, exp(residual) and the like
                at = min(max(at, -1.0), 1.0)  # must stay finite (0·inf is NaN): a price far off, a window narrow
            t[i] = at
            centred[i] = y[i] - average
        lo[s] = small
        hi[s] = large
        mean[s] = average
        y_low[s] = least
        x_low[s] = small


@compiled(inline=True)
def horner(coef, s, size, order, t):
    """The ``order``-th derivative in t of Σ_{k < size} coef[s, k]·tᵏ at the point t.

    The one polynomial evaluator: curve values, slopes, residuals and revenue
    all go through it (two compiled fit loops in ``kernels`` sum rising powers
    as they go instead: see there).  Horner's rule from the top coefficient.
    """
    if order >= size:
        return 0.0
    value = 0.0
    for k in range(size - 1, order - 1, -1):
        factor = 1.0
        for m in range(order):
            factor *= k - m
        value = coef[s, k] * factor if k == size - 1 else value * t + coef[s, k] * factor
    return value


@compiled(inline=True)
def leverage(x, lower, scale, size, power, v, out, at):
    """``out[r, at + i]`` = xᵢᵀ(XᵀWX)⁻¹xᵢ under the leading r + 1 coefficients (r < size), where
    xᵢ = (1, t, t², …) at t = x[i]: ‖L⁻¹D·xᵢ‖² with L Lᵀ = D XᵀWX D (``lower`` (P, P), D = diag(``scale``)).

    The one leverage: plan-price intervals, leave-one-out residuals and Cook's distances all use it.
    Points are the lanes (innermost loops); ``power`` (≥ len(x)) and ``v`` (≥ size, ≥ len(x)) are scratch.
    """
    n = len(x)
    for i in range(n):
        power[i] = 1.0
    for r in range(size):
        d_r, l_rr, vr, orow = scale[r], lower[r, r], v[r], out[r]
        for i in range(n):
            vr[i] = power[i] * d_r
        for c in range(r):
            l_rc, vc = lower[r, c], v[c]
            for i in range(n):
                vr[i] -= l_rc * vc[i]
        for i in range(n):
            vr[i] = vr[i] / l_rr
        if r == 0:
            for i in range(n):
                orow[at + i] = vr[i] * vr[i]
        else:
            before = out[r - 1]
            for i in range(n):
                orow[at + i] = before[at + i] + vr[i] * vr[i]
        for i in range(n):
            power[i] *= x[i]


@compiled
def _evaluate_segments(coef, bounds, size, order, t, out):
    for s in range(len(bounds) - 1):
        for i in range(bounds[s], bounds[s + 1]):
            out[i] = horner(coef, s, size, order, t[i])


@compiled
def _leverage_segments(x, lower, scale, bounds, out):
    p = lower.shape[1]
    longest = 0
    for s in range(len(bounds) - 1):
        longest = max(longest, bounds[s + 1] - bounds[s])
    power = np.zeros(longest)
    v = np.zeros((p, longest))
    for s in range(len(bounds) - 1):
        leverage(x[bounds[s]:bounds[s + 1]], lower[s], scale[s], p, power, v, out, bounds[s])


@compiled
def _evaluate_rows(coef, size, order, t, out, slope):
    """Polynomial s at ``t[s]`` into ``out[s]`` (and its slope into ``slope[s]`` when that is not empty);
    a ``t`` of one row serves every polynomial."""
    both = slope.shape[0] > 0
    shared = t.shape[0] == 1
    for s in range(out.shape[0]):
        row = 0 if shared else s
        for g in range(out.shape[1]):
            out[s, g] = horner(coef, s, size, order, t[row, g])
            if both:
                slope[s, g] = horner(coef, s, size, order + 1, t[row, g])


def _rows(t: np.ndarray) -> np.ndarray:
    """``t`` (S, G) as ``_evaluate_rows`` takes it, always contiguous and read-only (one compiled version):
    a grid broadcast over the series (its rows one row in memory) as that one row, uncopied."""
    if t.ndim == 2 and t.shape[0] > 1 and t.strides[0] == 0:
        t = t[:1]
    return readonly(np.ascontiguousarray(t))


def _bounds(n_points: int, offsets) -> np.ndarray:
    return np.arange(n_points + 1, dtype=np.int64) if offsets is None else np.asarray(offsets, dtype=np.int64)


def polynomial(coef: np.ndarray, t: np.ndarray, order: int = 0, offsets: np.ndarray | None = None) -> np.ndarray:
    """Values (``order`` 0) or derivatives in t of polynomials at points ``t``, through ``horner``.

    ``coef``: (P,) one polynomial at every point of ``t`` (any shape); (S, P)
    with ``t`` (S,) or (S, G), polynomial s at ``t[s]``; or (S, P) with ``t``
    (N,), polynomial s at points ``offsets[s]:offsets[s + 1]``.
    """
    coef = readonly(np.ascontiguousarray(coef, dtype=np.float64))
    t = np.asarray(t, dtype=np.float64)
    out = np.empty(t.shape)
    if coef.ndim == 2 and offsets is None:  # a grid broadcast over the series is not copied (``_rows``)
        if not len(coef):
            return out
        _evaluate_rows(coef, coef.shape[1], order, _rows(t.reshape(len(coef), -1)), out.reshape(len(coef), -1),
                       np.empty((0, 0)))
        return out
    t = readonly(np.ascontiguousarray(t))
    if coef.ndim == 1:
        _evaluate_segments(coef[None], readonly(np.array([0, t.size], dtype=np.int64)), coef.shape[0], order,
                           t.reshape(-1), out.reshape(-1))
    else:
        _evaluate_segments(coef, readonly(_bounds(len(t), offsets)), coef.shape[1], order, t, out)
    return out


def values_and_slopes(coef: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Values and first derivatives in t of polynomial s (``coef`` (S, P)) at points ``t[s]`` (S, G), in one
    pass through ``horner`` (the same numbers as two calls of ``polynomial``)."""
    coef = readonly(np.ascontiguousarray(coef, dtype=np.float64))
    t = np.asarray(t, dtype=np.float64)
    value, slope = np.empty(t.shape), np.empty(t.shape)
    if len(coef):
        _evaluate_rows(coef, coef.shape[1], 0, _rows(t), value, slope)
    return value, slope


def leverages(x: np.ndarray, lower: np.ndarray, scale: np.ndarray, offsets: np.ndarray | None = None) -> np.ndarray:
    """(P, N) xᵀ(XᵀWX)⁻¹x under the leading 1, 2, …, P coefficients at mapped points ``x`` (N,), through
    ``leverage``.  Fit s (``lower`` (S, P, P), ``scale`` (S, P)) serves points ``offsets[s]:offsets[s + 1]``
    (default: one point each)."""
    x = np.ascontiguousarray(x, dtype=np.float64)
    out = np.empty((lower.shape[1], len(x)))
    _leverage_segments(readonly(x), readonly(np.ascontiguousarray(lower)), readonly(np.ascontiguousarray(scale)),
                       readonly(_bounds(len(x), offsets)), out)
    return out


def unscaled_covariance(lower: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """(XᵀWX)⁻¹ (P, P) in the basis, from a fit's scaled Cholesky factor (L Lᵀ = D XᵀWX D):
    D·L⁻ᵀ·L⁻¹·D.  Times σ², the coefficients' covariance; a new point's leverage is xᵀ·it·x."""
    inverse = np.linalg.solve(lower, np.eye(len(scale)))
    return scale[:, None] * (inverse.T @ inverse) * scale[None, :]


def series_factor(x: np.ndarray, w: np.ndarray | None, size: int) -> tuple[np.ndarray, np.ndarray]:
    """One series' scaled Cholesky factor (P, P) and scale (P,) of its design in powers of mapped ``x``
    (weights ``w``), as the engine factors its fits (``lanes.factor``): for charts and checks, on demand."""
    from .lanes import factor
    w = np.ones(len(x)) if w is None else w
    sums = np.array([np.sum(w * x ** k) for k in range(2 * size - 1)])[:, None]
    lower, inverse = np.zeros((size, size, 1)), np.zeros((size, size, 1))
    scale, recip, cond, work = np.zeros((size, 1)), np.ones((size, 1)), np.zeros((size, 1)), np.zeros((3, 1))
    factor(sums, size, lower, scale, np.zeros((size, 1), dtype=np.bool_), cond, recip, inverse, work)
    return np.ascontiguousarray(lower[:, :, 0]), np.ascontiguousarray(scale[:, 0])
