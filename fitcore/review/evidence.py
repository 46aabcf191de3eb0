"""Curves and prediction bands of one series over a grid of prices, for charts.

Refits only the series being looked at (a QR factorisation of its own small
design matrix), so nothing beyond ``Results`` needs to be kept per series.
"""
from __future__ import annotations

import numpy as np

from ..fit.basis import leverages, mapped, polynomial, series_factor
from ..fit.prediction import t_quantile
from ..fit.results import Results


def series_rows(results: Results, s: int) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    data = results.data
    rows = slice(data.offsets[s], data.offsets[s + 1])
    return data.price[rows], data.volume[rows], None if data.weight is None else data.weight[rows]


def mapped_rows(results: Results, s: int, c: int, prices: np.ndarray) -> np.ndarray:
    if results.candidates[c].family == "poly":
        return mapped(prices, results.mid[s], results.half[s])
    with np.errstate(divide="ignore", invalid="ignore"):
        return mapped(np.log(prices), results.log_mid[s], results.log_half[s])


def curve(results: Results, s: int, c: int, prices: np.ndarray) -> np.ndarray:
    """Volume of candidate ``c`` of series ``s`` at ``prices`` (point prediction)."""
    cand = results.candidates[c]
    x = mapped_rows(results, s, c, np.asarray(prices, dtype=float))
    if cand.family == "poly":
        return polynomial(results.coef[s, c, :cand.degree + 1], x)
    a, e = results.coef[s, c, :2]
    return np.exp(a + e * x) * results.smear[s]


def design_factor(results: Results, s: int, c: int) -> tuple[np.ndarray, np.ndarray]:
    """The scaled Cholesky factor of candidate ``c``'s weighted design on series ``s``'s rows (``series_factor``)."""
    price, _, weight = series_rows(results, s)
    return series_factor(mapped_rows(results, s, c, price), weight, results.candidates[c].complexity)


def leverage_at(factor: tuple[np.ndarray, np.ndarray], x: np.ndarray) -> np.ndarray:
    """xᵀ(XᵀWX)⁻¹x at mapped points ``x``, under the full design of ``factor``."""
    lower, scale = factor
    x = np.asarray(x, dtype=float)
    return leverages(x, lower[None], scale[None], np.array([0, len(x)]))[-1]


def band(results: Results, s: int, c: int, prices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper prediction-interval bounds (``results.settings.level``) at ``prices``."""
    cand = results.candidates[c]
    x_grid = mapped_rows(results, s, c, np.asarray(prices, dtype=float))
    leverage = leverage_at(design_factor(results, s, c), x_grid)
    spread = t_quantile(results.settings.level, np.array([results.df[s, c]]))[0] * np.sqrt(
        results.sigma2[s, c] * (1 + leverage))
    if cand.family == "poly":
        centre = curve(results, s, c, prices)
        return centre - spread, centre + spread
    log_centre = results.coef[s, c, 0] + results.coef[s, c, 1] * x_grid
    return np.exp(log_centre - spread), np.exp(log_centre + spread)


def runner_up(results: Results, s: int) -> int:
    """The available candidate with the lowest CV error other than the chosen one (-1 if none)."""
    chosen = results.chosen[s]
    errors = np.where(results.available[s], results.cv_mse[s], np.inf)
    if chosen >= 0:
        errors[chosen] = np.inf
    best = int(np.argmin(errors))
    return best if np.isfinite(errors[best]) else -1
