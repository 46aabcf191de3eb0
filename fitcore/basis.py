"""The per-series price window and conversion to plain power-basis coefficients.

The engine fits in t = (price − mid) / half, which maps each series'
observed prices onto [-1, 1]; coefficients of powers of t are what it keeps.
For display and export they are re-expanded in powers of price itself.
"""
from __future__ import annotations

from math import comb

import numpy as np


def window(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(mid, half) of each [lo, hi]; half is 0 for a single price."""
    return (lo + hi) / 2, (hi - lo) / 2


def width(half: np.ndarray) -> np.ndarray:
    """The half-width to divide by: 1 where the window has no width (a single price)."""
    return np.where(half > 0, half, 1.0)


def mapped(x: np.ndarray, mid: np.ndarray, half: np.ndarray) -> np.ndarray:
    """x in the coordinate of its window: (x − mid) / half (half taken as 1 for a single price)."""
    return (x - mid) / width(half)


def to_window(x: np.ndarray, mid: np.ndarray, half: np.ndarray) -> np.ndarray:
    """Map x into [-1, 1] of its window (0 where the window has no width)."""
    return np.where(half > 0, mapped(x, mid, half), 0.0)


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
