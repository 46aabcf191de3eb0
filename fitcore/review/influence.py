"""Leverage and Cook's distance of one series' observations under its chosen curve.

Cook's distance Dᵢ = wᵢeᵢ²·hᵢᵢ / (p·s²·(1 − hᵢᵢ)²) (Cook 1977, Technometrics
19:15–18), with hᵢᵢ the leverage, eᵢ the residual, p the number of
coefficients and s² the residual variance, all on the family's fit scale
(ln volume for the log families, where they are fitted).

The engine keeps only each series' largest distance (``Results.top_cook``,
computed in ``kernels.influence_rows``); this recomputes one series' rows on
demand, for evidence and for checking.
"""
from __future__ import annotations

import numpy as np

from ..fit.basis import polynomial
from ..fit.results import Results
from . import control_evidence
from .evidence import basis_of, design_factor, leverage_at, mapped_rows, series_rows


def series_influence(results: Results, s: int) -> tuple[np.ndarray, np.ndarray]:
    """(n,) leverages and (n,) Cook's distances of series ``s``'s rows; NaN when nothing was chosen."""
    price, volume, weight = series_rows(results, s)
    c = int(results.chosen[s])
    if c < 0:
        return np.full(len(price), np.nan), np.full(len(price), np.nan)
    family, coef, *_ = basis_of(results, s, c)
    x = mapped_rows(results, s, c, price)
    w = np.ones_like(x) if weight is None else weight
    n_coef = len(coef)
    if results.controls is None:
        h, others = w * leverage_at(design_factor(results, s, c), x), 0.0
    else:  # each row at its own control values; the curve (``coef``) is at the plan's
        z, mean = control_evidence.centred(results, s)
        h = w * control_evidence.leverage(design_factor(results, s, c), x, z)
        offsets = control_evidence.plan_offsets(results, s, mean)
        others = np.asarray(results.controls.coef[s, c], dtype=float) @ (z - offsets[:, None])
        n_coef += int(results.controls.kept[s])
    with np.errstate(divide="ignore", invalid="ignore"):
        resid = family.response(volume) - polynomial(coef, x) - others
        cook = w * resid ** 2 * h / (n_coef * results.sigma2[s, c] * (1 - h) ** 2)
    return h, cook
