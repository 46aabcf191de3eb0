"""The stages of a chunk's fit after the families have fitted it, each over every family.

``gather`` lays the families' fits side by side as (S, C) cells; then
``unavailable`` (why a cell cannot be used), ``at_plan`` (volume, interval
and elasticity at the plan price), ``revenue`` (the revenue-best price of
the chosen curve) and ``influence`` (its largest Cook's distance).  The
engine runs them in that order, with the scores and the choice between.

With controls, ``gather`` also lays out each candidate's control coefficients
and moves its intercept to the plan's control values, so every later stage
(and every reader of ``Results.coef``) sees the price curve at the plan's
controls; intervals there take the leverage of the full design.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..compiled import readonly
from . import controlled_rows, kernels
from . import reasons as R
from .basis import leverages
from .controlled_rows import design_leverages
from .controls import tied_to_price
from .chunk import Chunk
from .families import Fitted, Lineup


@dataclass(frozen=True, eq=False)
class Cells:
    """Every family's fit of a chunk as one array per quantity over S series × C candidates.

    ``coef`` (S, C, P), P the widest candidate; ``mid``, ``half`` (S, C) each candidate's
    window; ``fit_ok``, ``held_ok``, ``unserved``, ``sse``, ``sigma2``, ``df``, ``smear`` (S, C)
    as in ``families.Fitted``; ``held_out`` (S, K, C) or (N, C); ``gamma`` (S, C, m) the control
    coefficients (None without controls), ``coef`` then holding each curve at the plan's controls.
    """

    coef: np.ndarray
    mid: np.ndarray
    half: np.ndarray
    fit_ok: np.ndarray
    held_ok: np.ndarray
    unserved: np.ndarray
    held_out: np.ndarray
    sse: np.ndarray
    sigma2: np.ndarray
    df: np.ndarray
    smear: np.ndarray
    gamma: np.ndarray | None = None


def gather(ch: Chunk, lineup: Lineup, fits: list[Fitted]) -> Cells:
    n_s, n_c = len(ch.counts), len(lineup.candidates)
    coef = np.zeros((n_s, n_c, lineup.width))
    mid, half, sse, fit_sse, smear = (np.empty((n_s, n_c)) for _ in range(5))
    fit_ok, held_ok, unserved = (np.empty((n_s, n_c), dtype=bool) for _ in range(3))
    held_out = np.empty(fits[0].held_out.shape[:-1] + (n_c,))
    for (_, cols), fit in zip(lineup.groups, fits):
        coef[:, cols, :fit.coef.shape[2]] = fit.coef
        mid[:, cols], half[:, cols] = fit.mid[:, None], fit.half[:, None]
        fit_ok[:, cols], held_ok[:, cols], held_out[..., cols] = fit.fit_ok, fit.held_ok, fit.held_out
        sse[:, cols], fit_sse[:, cols], smear[:, cols] = fit.sse, fit.fit_sse, fit.smear
        unserved[:, cols] = False if fit.unserved is None else fit.unserved[:, None]
    df = ch.n_obs[:, None] - lineup.complexity[None, :]  # a row of weight 0 is no observation
    gamma = None
    if ch.controls is not None:
        gamma = np.concatenate([fit.gamma for fit in fits], axis=1)
        df = df - ch.controls.kept[:, None]
        coef[:, :, 0] += np.einsum("scm,sm->sc", gamma, ch.controls.offset)  # the curves at the plan's controls
    return Cells(coef, mid, half, fit_ok, held_ok, unserved, held_out, sse, fit_sse / np.maximum(df, 1), df, smear,
                 gamma)


def hold_controls(ch: Chunk, lineup: Lineup, fits: list[Fitted]) -> None:
    """Complete the chunk's controls from the first family fitted in price itself: which controls are
    redundant, how price and the controls move together, the plan values as offsets from the means."""
    tie = next(fit.tie for (family, _), fit in zip(lineup.groups, fits) if family.regressor == "price")
    ch.controls = tied_to_price(ch.controls, tie)


def unavailable(ch: Chunk, lineup: Lineup, cells: Cells, cv_mse: np.ndarray) -> np.ndarray:
    """(S, C) int8 reason codes (``reasons``), the first that applies in this order (``cv_mse``: (S, C) the
    held-out scores, last: a candidate whose held-out error is not a finite number cannot be compared)."""
    n_coef = lineup.complexity
    every_coef = n_coef[None, :] if ch.controls is None else n_coef[None, :] + ch.controls.kept[:, None]
    rules = [
        ((ch.weight_reason == R.NO_WEIGHT)[:, None], R.NO_WEIGHT),
        ((ch.weight_reason == R.WEIGHT_OVERFLOW)[:, None], R.WEIGHT_OVERFLOW),
        (cells.unserved, R.NOT_SERVED),
        (~ch.lay.usable[:, None], R.TOO_FEW_FOR_FOLDS),
        ((ch.window[1] <= 0)[:, None] & (n_coef > 1)[None, :], R.FLAT_PRICE),
        (ch.n_obs[:, None] <= every_coef, R.TOO_FEW_POINTS),
        (~cells.fit_ok, R.RANK_ALL),
        (~cells.held_ok, ch.scheme.fold_failure),
        (~np.isfinite(cv_mse), R.HELD_OUT_OVERFLOW),
    ]
    reason = np.zeros(cells.fit_ok.shape, dtype=np.int8)
    for applies, code in reversed(rules):
        reason[np.broadcast_to(applies, reason.shape)] = code
    if ch.controls is not None:  # a price term lost to the controls, not to the prices
        tied = (ch.controls.vif > R.TIED_VIF)[:, None] & (n_coef > 1)[None, :]
        reason[tied & np.isin(reason, (R.RANK_ALL, R.RANK_FOLD))] = R.CONTROL_TIED
        # Price exactly a line of the controls leaves a curve in ln price told from them only by the curvature
        # of ln price (an elasticity of +0.97 from nothing else, a trial): what loses price's straight line loses
        # every price term.
        lost = (reason == R.CONTROL_TIED).any(axis=1)
        reason[lost[:, None] & (reason == R.NONE) & (n_coef > 1)[None, :]] = R.CONTROL_TIED
    return reason


def at_plan(lineup: Lineup, fits: list[Fitted], cells: Cells, available: np.ndarray, plan: np.ndarray,
            level: float, w_unit: np.ndarray, offset: np.ndarray | None = None) -> list[np.ndarray]:
    """(S, C) volume, interval bounds and elasticity of every available candidate at the plan price
    (``offset`` (S, m): the plan's centred control values, with controls).  The planned week weighs
    ``w_unit`` (S,), the series' average row of positive weight: σ²/w_unit + σ²·xᵀ(XᵀWX)⁻¹x is
    σ²/w_unit·(1 + w_unit·xᵀ(XᵀWX)⁻¹x) (``weights``)."""
    out = [np.full(available.shape, np.nan) for _ in range(4)]
    at = np.flatnonzero(np.isfinite(plan))
    if not len(at):
        return out
    price = plan[at]
    for (family, cols), fit in zip(lineup.groups, fits):
        mid, half = fit.mid[at], fit.half[at]
        t = family.coordinate(price, mid, half)
        if offset is None:
            lev, shift = leverages(t, fit.lower[at], fit.scale[at]), 0
        else:  # the leverage of [1, the plan's controls (centred), t, …] under the full design
            lev, shift = design_leverages(t, offset[at].T, fit.lower[at], fit.scale[at]), offset.shape[1]
        for c in range(cols.start, cols.stop):
            size = int(lineup.complexity[c])
            values = family.at(cells.coef[at, c, :size], mid, half, cells.smear[at, c],
                               lev[shift + size - 1] * w_unit[at], cells.sigma2[at, c] / w_unit[at], cells.df[at, c],
                               price, level)
            for column, value in zip(out, values):
                column[at, c] = np.where(available[at, c], value, np.nan)
    return out


def revenue(ch: Chunk, lineup: Lineup, cells: Cells, chosen: np.ndarray) -> np.ndarray:
    """(S,) the revenue-best price within the observed range under the chosen curve (NaN: none chosen)."""
    out = np.full(len(chosen), np.nan)
    for family, cols in lineup.groups:
        rows = np.flatnonzero((chosen >= cols.start) & (chosen < cols.stop))
        if len(rows):
            c = chosen[rows]
            out[rows] = family.best_revenue(cells.coef[rows, c], cells.mid[rows, c], cells.half[rows, c],
                                            cells.smear[rows, c], ch.lo[rows], ch.hi[rows])
    return out


def influence(ch: Chunk, lineup: Lineup, fits: list[Fitted], cells: Cells, chosen: np.ndarray):
    """Per series (S,): the largest Cook's distance of a row under the chosen curve (-1 when none)
    and the first chunk-relative dataset row holding it (-1 when none); on each family's fit scale."""
    n_s = len(ch.counts)
    top, first = np.full(n_s, -1.0), np.full(n_s, -1, dtype=np.int64)
    order = np.arange(len(ch.price)) if ch.lay.order is None else ch.lay.order  # chunk-relative dataset rows
    weight = readonly(np.empty(0) if ch.weight is None else ch.weight)
    offsets = readonly(ch.offsets.astype(np.int64))
    order = readonly(order)
    every = np.arange(n_s)
    for (family, cols), fit in zip(lineup.groups, fits):
        mine = (chosen >= cols.start) & (chosen < cols.stop)
        picked = np.clip(chosen, cols.start, cols.stop - 1)
        size = np.where(mine, lineup.complexity[picked], 0)
        row_coef = np.ascontiguousarray(fit.row_coef[every, picked - cols.start])
        if ch.controls is None:
            kernels.influence_rows(readonly(fit.rows), readonly(fit.target), weight, offsets, order, readonly(row_coef),
                                   readonly(size), readonly(fit.lower), readonly(fit.scale),
                                   readonly(cells.sigma2[every, picked]), top, first)
            continue
        z = ch.controls.z
        controlled_rows.influence_rows(readonly(fit.rows), readonly(fit.target), readonly(z), weight, offsets, order,
                                       readonly(row_coef),
                                       readonly(np.ascontiguousarray(fit.gamma[every, picked - cols.start])),
                                       readonly(np.where(mine, size + len(z), 0)), readonly(fit.lower),
                                       readonly(fit.scale), readonly(cells.sigma2[every, picked]),
                                       readonly((size + ch.controls.kept).astype(float)), top, first)
    return top, first
