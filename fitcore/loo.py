"""Exact leave-one-out residuals from the hat matrix (PRESS), no refits.

For a least-squares fit with weights w, the residual at row i of the fit
without row i is eᵢ / (1 − hᵢᵢ), where hᵢᵢ = wᵢ·xᵢᵀ(XᵀWX)⁻¹xᵢ.  With the
full fit's scaled Cholesky factor, hᵢᵢ = wᵢ·‖L⁻¹Dxᵢ‖², and the leading
components of L⁻¹Dxᵢ give hᵢᵢ for every lower degree at once.
"""
from __future__ import annotations

import numpy as np

from .linalg import forward_solve
from .polyfit import FamilyFit, horner

# hᵢᵢ this close to 1 means row i alone pins down a coefficient: its
# leave-one-out prediction is undefined.
LEVERAGE_LIMIT = 1 - 1e-8


def loo_residuals(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, series: np.ndarray,
                  fit: FamilyFit) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-out residuals (N, D) and whether each (series, degree) has them all (S, D).

    ``series``: (N,) the chunk-local series of each row.
    """
    p = fit.lower.shape[-1]
    basis = x[:, None] ** np.arange(p) * fit.scale[series]
    v = forward_solve(fit.lower[series], basis)
    cumulative = np.cumsum(v * v, axis=1)
    weight = 1.0 if w is None else w[:, None]
    resid = np.empty((len(x), len(fit.degrees)))
    defined = np.ones((len(fit.lower), len(fit.degrees)), dtype=bool)
    for j, d in enumerate(fit.degrees):
        h = (weight * cumulative[:, d:d + 1])[:, 0]
        high = h >= LEVERAGE_LIMIT
        defined[np.unique(series[high]), j] = False
        e = y - horner(fit.coef[series, -1, j], x)
        resid[:, j] = e / np.where(high, 1.0, 1.0 - h)
    return resid, defined
