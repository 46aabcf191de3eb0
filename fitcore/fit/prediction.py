"""Volume at a price: point, prediction interval, elasticity, revenue-best price.

Intervals are the ordinary least-squares t-intervals for a new observation:
ŷ ± t(1 − α/2, n − p)·σ̂·√(1 + xᵀ(XᵀWX)⁻¹x).  For the log-log curve the
interval is built on the log scale and exponentiated; its point prediction
carries Duan's smearing factor.  Coefficient arrays are entry-first: (P, S).
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled
from .basis import evaluate, mapped, polynomial, width


def t_quantile(level: float, df: np.ndarray) -> np.ndarray:
    """Student-t quantile at (1 + level)/2 for each df (computed once per distinct df)."""
    from scipy.special import (
        stdtrit,  # imported on first use: scipy costs 0.2 s to import
    )

    df = np.maximum(np.asarray(df), 1)
    if df.size and df.max() <= 4096:  # a lookup table beats sorting for the usual sizes
        return stdtrit(np.arange(1, df.max() + 1), 1 - (1 - level) / 2)[df - 1]
    distinct, index = np.unique(df, return_inverse=True)
    return stdtrit(distinct, 1 - (1 - level) / 2)[index.reshape(np.shape(df))]


def poly_at(coef, mid, half, leverage, sigma2, df, price, level):
    """Volume, interval bounds and elasticity of polynomial curves at ``price`` (each (S,)).

    ``leverage``: (S,) xᵀ(XᵀWX)⁻¹x at the price for this degree (``loo.leverages``).
    """
    t = mapped(price, mid, half)
    volume = polynomial(coef.T, t)
    with np.errstate(invalid="ignore"):
        spread = t_quantile(level, df) * np.sqrt(sigma2 * (1 + leverage))
    slope = polynomial(coef.T, t, 1) / width(half)
    with np.errstate(divide="ignore", invalid="ignore"):
        elasticity = slope * price / volume
    return volume, volume - spread, volume + spread, elasticity


def loglog_at(coef, mid, half, leverage, smear, sigma2, df, price, level):
    """The same for log-log curves; ``coef`` (2, S) in mapped ln price, ln volume not centred."""
    with np.errstate(divide="ignore", invalid="ignore"):
        log_volume = coef[0] + coef[1] * mapped(np.log(price), mid, half)
        spread = t_quantile(level, df) * np.sqrt(sigma2 * (1 + leverage))
        return (np.exp(log_volume) * smear, np.exp(log_volume - spread), np.exp(log_volume + spread),
                coef[1] / width(half))


def best_revenue_poly(coef: np.ndarray, mid: np.ndarray, half: np.ndarray, grid: int = 65) -> np.ndarray:
    """(S,) the price in [mid − half, mid + half] maximising price × volume; ``coef`` (P, S) in t
    (grid search, then safeguarded Newton steps: ``revenue_peak_poly``)."""
    t = np.empty(len(mid))
    revenue_peak_poly(np.ascontiguousarray(np.asarray(coef, dtype=np.float64).T), mid.astype(np.float64),
                              half.astype(np.float64), grid, t)
    return mid + half * t


def best_revenue_loglog(elasticity: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Revenue ∝ price^(1 + e): highest at the top of the range when e > −1, else at the bottom."""
    return np.where(elasticity > -1, hi, lo)


@compiled
def revenue_peak_poly(coef, mid, half, grid, out):
    """``out[s]``: the t in [-1, 1] maximising (mid + half·t) × Σ coef[s, k]·tᵏ.

    A grid of ``grid`` points finds the best cell (first maximum); Newton steps
    on d(revenue)/dt, kept inside the neighbouring cells and taken only when
    they raise revenue, make the optimum exact for a quadratic revenue
    (linear demand) and accurate to round-off for smooth ones.
    """
    step = 2.0 / (grid - 1)
    p = coef.shape[1]
    ts = np.empty(grid)
    for g in range(grid):
        ts[g] = -1.0 + g * step if g < grid - 1 else 1.0
    values = np.empty(grid)
    point = np.empty(1)
    v = np.empty(1)
    v1 = np.empty(1)
    v2 = np.empty(1)
    moved = np.empty(1)
    for s in range(coef.shape[0]):
        evaluate(coef[s], p, 0, ts, values)
        best = -np.inf
        t = -1.0
        for g in range(grid):
            revenue = (mid[s] + half[s] * ts[g]) * values[g]
            if revenue > best:
                best = revenue
                t = ts[g]
        lo = max(t - step, -1.0)
        hi = min(t + step, 1.0)
        for _ in range(8):
            price = mid[s] + half[s] * t
            point[0] = t
            evaluate(coef[s], p, 0, point, v)
            evaluate(coef[s], p, 1, point, v1)
            evaluate(coef[s], p, 2, point, v2)
            grad = half[s] * v[0] + price * v1[0]
            curv = 2 * half[s] * v1[0] + price * v2[0]
            candidate = min(max(t - grad / curv, lo), hi)
            if curv < 0 and np.isfinite(candidate):
                point[0] = candidate
                evaluate(coef[s], p, 0, point, moved)
                if (mid[s] + half[s] * candidate) * moved[0] >= price * v[0]:
                    t = candidate
        out[s] = t
