"""Exact leave-one-out residuals from the hat matrix (PRESS), no refits.

For a least-squares fit with weights w, the residual at row i of the fit
without row i is eᵢ / (1 − hᵢᵢ), where hᵢᵢ = wᵢ·xᵢᵀ(XᵀWX)⁻¹xᵢ.  With the
full fit's scaled Cholesky factor, hᵢᵢ = wᵢ·‖L⁻¹Dxᵢ‖², and the leading
components of L⁻¹Dxᵢ give hᵢᵢ for every lower degree at once.
"""
from __future__ import annotations

import numpy as np

from . import kernels
from .polyfit import FamilyFit, horner

# hᵢᵢ this close to 1 means row i alone pins down a coefficient: its
# leave-one-out prediction is undefined.
LEVERAGE_LIMIT = 1 - 1e-8


def leverages(x: np.ndarray, lower: np.ndarray, scale: np.ndarray, series: np.ndarray | None = None,
              sizes: np.ndarray | None = None) -> np.ndarray:
    """xᵀ(XᵀWX)⁻¹x at points ``x`` (N,): (P, N) for the leading 1, 2, …, P coefficients,
    or (N,) for each point's own number of coefficients ``sizes`` (N,).

    ``lower`` (S, P, P) and ``scale`` (S, P): scaled Cholesky factors; point i
    belongs to series ``series[i]`` (default: point i to series i).
    """
    x = np.ascontiguousarray(x, dtype=np.float64)
    series = np.arange(len(x)) if series is None else series
    own = sizes is not None
    out = np.empty((1 if own else lower.shape[1], len(x)))
    kernels.leverage_rows(x, np.ascontiguousarray(lower), np.ascontiguousarray(scale), series.astype(np.int64),
                          np.empty(0, np.int64) if not own else sizes.astype(np.int64), out)
    return out[0] if own else out


def loo_residuals(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, series: np.ndarray,
                  fit: FamilyFit) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-out residuals (D, N) and whether each (degree, series) has them all (D, S).

    ``series``: (N,) the chunk-local series of each row.
    """
    h_all = leverages(x, fit.lower, fit.scale, series)
    if w is not None:
        h_all = h_all * w
    resid = np.empty((len(fit.degrees), len(x)))
    defined = np.ones((len(fit.degrees), fit.lower.shape[0]), dtype=bool)
    for j, d in enumerate(fit.degrees):
        h = h_all[d]
        high = h >= LEVERAGE_LIMIT
        defined[j, np.unique(series[high])] = False
        e = y - horner(fit.coef[series, -1, j].T, x)
        resid[j] = e / np.where(high, 1.0, 1.0 - h)
    return resid, defined
