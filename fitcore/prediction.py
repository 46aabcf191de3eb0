"""Volume at a price: point, prediction interval, elasticity, revenue-best price.

Intervals are the ordinary least-squares t-intervals for a new observation:
ŷ ± t(1 − α/2, n − p)·σ̂·√(1 + xᵀ(XᵀWX)⁻¹x).  For the log-log curve the
interval is built on the log scale and exponentiated; its point prediction
carries Duan's smearing factor.  Coefficient arrays are entry-first: (P, S).
"""
from __future__ import annotations

import numpy as np

from . import kernels
from .basis import mapped, width
from .polyfit import horner


def t_quantile(level: float, df: np.ndarray) -> np.ndarray:
    """Student-t quantile at (1 + level)/2 for each df (computed once per distinct df)."""
    from scipy.special import stdtrit  # imported on first use: scipy costs 0.2 s to import

    df = np.maximum(np.asarray(df), 1)
    if df.size and df.max() <= 4096:  # a lookup table beats sorting for the usual sizes
        return stdtrit(np.arange(1, df.max() + 1), 1 - (1 - level) / 2)[df - 1]
    distinct, index = np.unique(df, return_inverse=True)
    return stdtrit(distinct, 1 - (1 - level) / 2)[index.reshape(np.shape(df))]


def derivative(coef: np.ndarray) -> np.ndarray:
    """Coefficients (P, …) of d/dt Σ coef[k]·tᵏ (last one zero)."""
    k = np.arange(1, coef.shape[0]).reshape((-1,) + (1,) * (coef.ndim - 1))
    return np.concatenate([coef[1:] * k, np.zeros((1,) + coef.shape[1:])])


def poly_at(coef, mid, half, leverage, sigma2, df, price, level):
    """Volume, interval bounds and elasticity of polynomial curves at ``price`` (each (S,)).

    ``leverage``: (S,) xᵀ(XᵀWX)⁻¹x at the price for this degree (``loo.leverages``).
    """
    t = mapped(price, mid, half)
    volume = horner(coef, t)
    with np.errstate(invalid="ignore"):
        spread = t_quantile(level, df) * np.sqrt(sigma2 * (1 + leverage))
    slope = horner(derivative(coef), t) / width(half)
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
    (grid search, then safeguarded Newton steps: ``kernels.revenue_peak_poly``)."""
    t = np.empty(len(mid))
    kernels.revenue_peak_poly(np.ascontiguousarray(np.asarray(coef, dtype=np.float64).T), mid.astype(np.float64),
                              half.astype(np.float64), grid, t)
    return mid + half * t


def best_revenue_loglog(elasticity: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Revenue ∝ price^(1 + e): highest at the top of the range when e > −1, else at the bottom."""
    return np.where(elasticity > -1, hi, lo)
