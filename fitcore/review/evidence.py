"""Curves and prediction bands of one series over a grid of prices, for charts.

Refits only the series being looked at (its own small design, factored
as the engine factors its fits), so nothing beyond ``Results`` needs to be
kept per series.  Every family is drawn through its own hooks.  With
controls, curves and bands are at the plan's control values (``Results.coef``
holds the curves there) and the design holds the controls (``control_evidence``).
"""
from __future__ import annotations

import numpy as np

from ..fit.basis import leverages, series_factor
from ..fit.results import Results
from ..fit.weights import relative
from . import control_evidence


def series_rows(results: Results, s: int) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Series ``s``'s prices, volumes and weights as the engine fits them (``weights.relative``)."""
    data = results.data
    rows = slice(data.offsets[s], data.offsets[s + 1])
    weight = None if data.weight is None else relative(data.weight[rows], np.array([0, rows.stop - rows.start]))
    return data.price[rows], data.volume[rows], weight


def basis_of(results: Results, s: int, c: int):
    """Candidate ``c`` of series ``s``: its family, coefficients (size,), window mid and half, smearing."""
    size = results.candidates[c].complexity
    return (results.family_of(c), np.asarray(results.coef[s, c, :size], dtype=float),
            float(results.basis_mid[s, c]), float(results.basis_half[s, c]), float(results.smear[s, c]))


def mapped_rows(results: Results, s: int, c: int, prices: np.ndarray) -> np.ndarray:
    family, _, mid, half, _ = basis_of(results, s, c)
    return family.coordinate(np.asarray(prices, dtype=float), mid, half)


def curve(results: Results, s: int, c: int, prices: np.ndarray) -> np.ndarray:
    """Volume of candidate ``c`` of series ``s`` at ``prices`` (point prediction)."""
    family, coef, mid, half, smear = basis_of(results, s, c)
    return family.curve(coef, mid, half, smear, np.asarray(prices, dtype=float))


def design_factor(results: Results, s: int, c: int) -> tuple[np.ndarray, np.ndarray]:
    """The scaled Cholesky factor of candidate ``c``'s weighted design on series ``s``'s rows (``series_factor``;
    with controls, over [1, controls…, t, …]: ``control_evidence.design_factor``)."""
    price, _, weight = series_rows(results, s)
    t, size = mapped_rows(results, s, c, price), results.candidates[c].complexity
    if results.controls is None:
        return series_factor(t, weight, size)
    return control_evidence.design_factor(t, control_evidence.centred(results, s)[0], weight, size)


def covariance(results: Results, s: int, c: int) -> np.ndarray:
    """(XᵀWX)⁻¹ (size, size) of candidate ``c`` on series ``s``'s rows, in its basis (``basis_of``): with
    σ² (``results.sigma2``) and df, all a signed curve needs for an interval at a new price.  With controls,
    that of the curve at the plan's control values.  The one series' cell of ``intervals.covariances``, the
    matrix the results store and a sign-off records."""
    from .intervals import covariances
    k = results.candidates[c].complexity
    return covariances(results, np.array([s]))[0, c, :k, :k]


def adjusted_volumes(results: Results, s: int, c: int) -> np.ndarray:
    """Series ``s``'s volumes moved to the plan's control values under candidate ``c`` (partial residuals:
    what each observation would have sold at its own price with the controls as planned); the volumes
    themselves without controls."""
    _, volume, _ = series_rows(results, s)
    if results.controls is None or c < 0:
        return volume
    ctl = results.controls
    return control_evidence.adjusted(results.family_of(c), volume, np.asarray(ctl.coef[s, c], dtype=float),
                                     control_evidence.control_rows(results, s), np.asarray(ctl.plan[s], dtype=float),
                                     np.asarray(ctl.left_out[s]) == 0)


def leverage_at(factor: tuple[np.ndarray, np.ndarray], x: np.ndarray) -> np.ndarray:
    """xᵀ(XᵀWX)⁻¹x at mapped points ``x``, under the full design of ``factor``."""
    lower, scale = factor
    x = np.asarray(x, dtype=float)
    return leverages(x, lower[None], scale[None], np.array([0, len(x)]))[-1]


def band(results: Results, s: int, c: int, prices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper prediction-interval bounds (``results.settings.level``) at ``prices``."""
    family, coef, mid, half, smear = basis_of(results, s, c)
    prices = np.asarray(prices, dtype=float)
    x, factor = family.coordinate(prices, mid, half), design_factor(results, s, c)
    if results.controls is None:
        leverage = leverage_at(factor, x)
    else:  # new points at the plan's control values
        offsets = control_evidence.plan_offsets(results, s, control_evidence.centred(results, s)[1])
        leverage = control_evidence.leverage(factor, x, np.repeat(offsets[:, None], len(x), axis=1))
    _, lower, upper, _ = family.at(coef, mid, half, smear, leverage, results.sigma2[s, c], results.df[s, c],
                                   prices, results.settings.level)
    return lower, upper


def runner_up(results: Results, s: int) -> int:
    """The available candidate with the lowest CV error other than the chosen one (-1 if none)."""
    chosen = results.chosen[s]
    errors = np.where(results.available[s], results.cv_mse[s], np.inf)
    if chosen >= 0:
        errors[chosen] = np.inf
    best = int(np.argmin(errors))
    return best if np.isfinite(errors[best]) else -1
