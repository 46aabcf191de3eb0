"""Leverage and Cook's distance of one series' observations under its chosen curve.

Cook's distance Dᵢ = wᵢeᵢ²·hᵢᵢ / (p·s²·(1 − hᵢᵢ)²) (Cook 1977, Technometrics
19:15–18), with hᵢᵢ the leverage, eᵢ the residual, p the number of
coefficients and s² the residual variance.  For the log-log curve both are
on the log scale, where that curve is fitted.

The engine keeps only each series' largest distance (``Results.top_cook``,
computed in ``kernels.influence_rows``); this recomputes one series' rows on
demand, for evidence and for checking.
"""
from __future__ import annotations

import numpy as np

from ..fit.basis import polynomial
from ..fit.results import Results
from .evidence import design_factor, leverage_at, mapped_rows, series_rows


def series_influence(results: Results, s: int) -> tuple[np.ndarray, np.ndarray]:
    """(n,) leverages and (n,) Cook's distances of series ``s``'s rows; NaN when nothing was chosen."""
    price, volume, weight = series_rows(results, s)
    c = int(results.chosen[s])
    if c < 0:
        return np.full(len(price), np.nan), np.full(len(price), np.nan)
    cand = results.candidates[c]
    x = mapped_rows(results, s, c, price)
    w = np.ones_like(x) if weight is None else weight
    h = w * leverage_at(design_factor(results, s, c), x)
    if cand.family == "poly":
        resid = volume - polynomial(results.coef[s, c, :cand.degree + 1], x)
    else:
        resid = np.log(volume) - (results.coef[s, c, 0] + results.coef[s, c, 1] * x)
    with np.errstate(divide="ignore", invalid="ignore"):
        cook = w * resid ** 2 * h / (cand.complexity * results.sigma2[s, c] * (1 - h) ** 2)
    return h, cook
