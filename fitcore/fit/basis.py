"""The per-series price window and conversion to plain power-basis coefficients.

The engine fits in t = (price − mid) / half, which maps each series'
observed prices onto [-1, 1]; coefficients of powers of t are what it keeps.
For display and export they are re-expanded in powers of price itself.
"""
from __future__ import annotations

from math import comb

import numpy as np

from ..compiled import compiled


def window(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(mid, half) of each [lo, hi]; half is 0 for a single price."""
    return (lo + hi) / 2, (hi - lo) / 2


def width(half: np.ndarray) -> np.ndarray:
    """The half-width to divide by: 1 where the window has no width (a single price)."""
    return np.where(half > 0, half, 1.0)


def mapped(x: np.ndarray, mid: np.ndarray, half: np.ndarray) -> np.ndarray:
    """x in the coordinate of its window: (x − mid) / half (half taken as 1 for a single price)."""
    return (x - mid) / width(half)


def plain_loglog(a: np.ndarray, e: np.ndarray, log_mid: np.ndarray, log_half: np.ndarray):
    """(a, e) of ln volume = a + e·ln price, from coefficients in u = (ln price − log_mid)/log_half."""
    slope = e / width(log_half)
    return a - slope * log_mid, slope


def power_coefficients(coef: np.ndarray, mid: np.ndarray, half: np.ndarray) -> np.ndarray:
    """Coefficients of powers of price from coefficients of powers of t.

    ``coef``: (..., P) with Σ coef[k]·tᵏ, t = (price − mid)/half; ``mid``,
    ``half``: (...).  Returns (..., P) with Σ out[j]·priceʲ the same curve:
    out[j] = Σₖ coef[k]·C(k, j)·(−mid)^(k−j) / halfᵏ.
    """
    p = coef.shape[-1]
    half = np.where(half > 0, half, 1.0)[..., None]
    mid = np.asarray(mid)[..., None]
    scaled = coef / half ** np.arange(p)
    out = np.zeros_like(scaled)
    for k in range(p):
        for j in range(k + 1):
            out[..., j] += scaled[..., k] * comb(k, j) * (-mid[..., 0]) ** (k - j)
    return out


@compiled
def window_rows(x, y, w, offsets, use, t, centred, lo, hi, mean, y_low):
    """Per series: price window [lo, hi], x mapped onto [-1, 1] (0 for a single price), y less its
    weighted ``mean``, and the smallest y.  Series with ``use[s]`` False (when ``use`` is not
    empty) get zeros throughout."""
    weighted = len(w) > 0
    restricted = len(use) > 0
    for s in range(len(offsets) - 1):
        start, stop = offsets[s], offsets[s + 1]
        if restricted and not use[s]:
            for i in range(start, stop):
                t[i] = 0.0
                centred[i] = 0.0
            lo[s] = hi[s] = mean[s] = y_low[s] = 0.0
            continue
        small = np.inf
        large = -np.inf
        least = np.inf
        total_w = 0.0
        total_wy = 0.0
        for i in range(start, stop):
            wi = w[i] if weighted else 1.0
            small = min(small, x[i])
            large = max(large, x[i])
            least = min(least, y[i])
            total_w += wi
            total_wy += wi * y[i]
        mid = (small + large) / 2
        half = (large - small) / 2
        average = total_wy / (total_w if total_w > 0 else 1.0)
        for i in range(start, stop):
            t[i] = (x[i] - mid) / half if half > 0 else 0.0
            centred[i] = y[i] - average
        lo[s] = small
        hi[s] = large
        mean[s] = average
        y_low[s] = least
