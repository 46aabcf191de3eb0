"""Leverage and Cook's distance of every observation under its series' chosen curve.

Cook's distance Dᵢ = wᵢeᵢ²·hᵢᵢ / (p·s²·(1 − hᵢᵢ)²) (Cook 1977, Technometrics
19:15–18), with hᵢᵢ the leverage, eᵢ the residual, p the number of
coefficients and s² the residual variance.  For the log-log curve both are
on the log scale, where that curve is fitted.
"""
from __future__ import annotations

import numpy as np

from .loo import leverages


def cook_distance(x: np.ndarray, resid: np.ndarray, weight: np.ndarray | None, series: np.ndarray,
                  lower: np.ndarray, scale: np.ndarray, size: np.ndarray, sigma2: np.ndarray):
    """(N,) Cook's distances and (N,) leverages.

    ``x``: mapped regressor per row; ``resid``: residual per row; ``series``:
    each row's series (indexes ``lower`` (P, P, S), ``scale`` (P, S),
    ``sigma2`` (S,)); ``size``: (S,) coefficients of each series' curve.
    """
    if len(x) == 0:
        return np.zeros(0), np.zeros(0)
    h = leverages(x, lower, scale, series, sizes=size[series])
    w = 1.0 if weight is None else weight
    h = h * w
    with np.errstate(divide="ignore", invalid="ignore"):
        cook = w * resid ** 2 * h / (size[series] * sigma2[series] * (1 - h) ** 2)
    return cook, h
