"""Exact leave-one-out residuals from the hat matrix (PRESS), no refits.

For a least-squares fit with weights w, the residual at row i of the fit
without row i is eᵢ / (1 − hᵢᵢ), where hᵢᵢ = wᵢ·xᵢᵀ(XᵀWX)⁻¹xᵢ.  With the
full fit's scaled Cholesky factor, hᵢᵢ = wᵢ·‖L⁻¹Dxᵢ‖², and the leading
components of L⁻¹Dxᵢ give hᵢᵢ for every lower degree at once.  With controls the
design is [1, controls…, t, …] (``controlled_rows.design_leverages``); a row
that alone pins down a control (its *lone row*: the control is constant on
every other row) is predicted, when left out, by the fit without that control,
as any held-out row whose training rows hold a control constant: its residual
is then γ·(its value − the others' value) (``lone_effect``).
"""
from __future__ import annotations

import numpy as np

from .basis import leverages, polynomial
from .polyfit import FamilyFit

# hᵢᵢ this close to 1 means row i alone pins down a coefficient: its
# leave-one-out prediction is undefined.
LEVERAGE_LIMIT = 1 - 1e-8


def loo_residuals(x: np.ndarray, y: np.ndarray, w: np.ndarray | None, offsets: np.ndarray,
                  fit: FamilyFit, controls=None) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-out residuals (D, N) and whether each (degree, series) has them all (D, S).

    ``offsets``: (S + 1,) series s owns rows ``offsets[s]:offsets[s + 1]``; ``controls``: the chunk's
    ``controls.ChunkControls`` when the fit has them.
    """
    counts = np.diff(offsets)
    if controls is None:
        h_all, first = leverages(x, fit.lower, fit.scale, offsets), 0
    else:
        from .controlled_rows import design_leverages, fitted_controls
        h_all, first = design_leverages(x, controls.z, fit.lower, fit.scale, offsets), len(controls.z)
    if w is not None:
        h_all = h_all * w
    resid = np.empty((len(fit.degrees), len(x)))
    defined = np.ones((len(fit.degrees), fit.lower.shape[0]), dtype=bool)
    series = np.repeat(np.arange(len(offsets) - 1), counts)
    for j, d in enumerate(fit.degrees):
        h = h_all[first + d]
        high = h >= LEVERAGE_LIMIT
        e = y - polynomial(fit.coef[:, -1, j], x, offsets=offsets)
        if controls is not None:
            e -= fitted_controls(fit.gamma[:, -1, j], controls.z, counts)
        resid[j] = e / np.where(high, 1.0, 1.0 - h)
        if controls is not None:
            lone, effect = lone_effect(controls, fit.gamma[:, -1, j], fit.scale[:, 1:len(controls.z) + 1] > 0, len(x))
            resid[j] = np.where(high & lone, effect, resid[j])
            high &= ~lone
        defined[j, np.unique(series[high])] = False
    return resid, defined


def lone_effect(controls, gamma: np.ndarray, kept: np.ndarray, n_rows: int) -> tuple[np.ndarray, np.ndarray]:
    """(N,) whether a row is the lone row of a control the full fit kept (``kept`` (S, m)), and Σ γ·gap
    over those: its leave-one-out residual under the fit without them (``gamma`` (S, m) the full fit's)."""
    series, term = np.nonzero((controls.lone >= 0) & kept)
    rows = controls.lone[series, term]
    lone = np.zeros(n_rows, dtype=bool)
    lone[rows] = True
    effect = np.zeros(n_rows)
    np.add.at(effect, rows, gamma[series, term] * controls.gap[series, term])
    return lone, effect
