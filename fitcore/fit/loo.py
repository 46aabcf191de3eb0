"""Exact leave-one-out residuals from the hat matrix (PRESS), no refits.

For a least-squares fit with weights w, the residual at row i of the fit
without row i is eᵢ / (1 − hᵢᵢ), where hᵢᵢ = wᵢ·xᵢᵀ(XᵀWX)⁻¹xᵢ.  With the
full fit's scaled Cholesky factor, hᵢᵢ = wᵢ·‖L⁻¹Dxᵢ‖², and the leading
components of L⁻¹Dxᵢ give hᵢᵢ for every lower degree at once.
"""
from __future__ import annotations

import numpy as np

from .basis import leverages, polynomial
from .polyfit import FamilyFit

# hᵢᵢ this close to 1 means row i alone pins down a coefficient: its
# leave-one-out prediction is undefined.
LEVERAGE_LIMIT = 1 - 1e-8


def loo_residuals(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, offsets: np.ndarray,
                  fit: FamilyFit) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-out residuals (D, N) and whether each (degree, series) has them all (D, S).

    ``offsets``: (S + 1,) series s owns rows ``offsets[s]:offsets[s + 1]``.
    """
    h_all = leverages(x, fit.lower, fit.scale, offsets)
    if w is not None:
        h_all = h_all * w
    resid = np.empty((len(fit.degrees), len(x)))
    defined = np.ones((len(fit.degrees), fit.lower.shape[0]), dtype=bool)
    series = np.repeat(np.arange(len(offsets) - 1), np.diff(offsets))
    for j, d in enumerate(fit.degrees):
        h = h_all[d]
        high = h >= LEVERAGE_LIMIT
        defined[j, np.unique(series[high])] = False
        e = y - polynomial(fit.coef[:, -1, j], x, offsets=offsets)
        resid[j] = e / np.where(high, 1.0, 1.0 - h)
    return resid, defined
