"""Observation weights as the fits use them: relative to each series' average row of positive weight.

Weighted least squares gives the same curve whatever the weights' unit, but a
prediction interval adds the variance of the new observation, σ²/w₀, and
needs that observation's weight w₀.  pricefold takes the planned week to weigh
as much as the series' average row of positive weight (``unit``): σ² and
(XᵀWX)⁻¹ are reported as those of the weights over that average (``relative``,
which average 1), and every interval is σ²·(1 + xᵀ(XᵀWX)⁻¹x) of those: the
same for weights in any unit.  The fits themselves take the weights as given
(a curve does not depend on their unit).  A row of weight 0 tells a fit
nothing: it is no observation (``weighed_counts``), no fold holds it out
(``folds``), and it is not among the prices (or control values) observed (``observed``).
"""
from __future__ import annotations

import numpy as np

from .segments import segment_sums


def weighed_counts(weight: np.ndarray | None, offsets: np.ndarray) -> np.ndarray:
    """(S,) int64 each series' rows of positive weight (all its rows when unweighted)."""
    counts = np.diff(offsets).astype(np.int64)
    if weight is None or not (weight == 0).any():  # the usual case: one comparison, no copy
        return counts
    return segment_sums((weight > 0).astype(np.float64), _bounds(offsets))[:, 0].astype(np.int64)


def observed(weight: np.ndarray | None, offsets: np.ndarray) -> np.ndarray | None:
    """(N,) bool the rows a series' observed range of prices and controls is judged over: its rows of positive
    weight, or every row of a series none of whose rows weighs more than 0 (it has no model); None where that
    is every row (unweighted, or no row weighs 0: the usual case, no copy)."""
    if weight is None or not len(weight) or not (weight == 0).any():
        return None
    return (weight > 0) | np.repeat(weighed_counts(weight, offsets) == 0, np.diff(offsets))


def idle_positive(values: np.ndarray, weight: np.ndarray | None) -> np.ndarray:
    """``values`` (prices or volumes) with those of rows of weight 0 that are not above 0 taken as 1: such a row
    weighs nothing, but its logarithm enters every sum a log family makes (as 0 × −inf = NaN); a price or volume
    of 0 there made loglog and semilog unavailable for the whole series (a trial).  The same array where none."""
    if weight is None or not len(values):
        return values
    idle = ~(weight > 0) & ~(values > 0)
    return np.where(idle, 1.0, values) if idle.any() else values


def relative(weight: np.ndarray | None, offsets: np.ndarray) -> np.ndarray | None:
    """(N,) ``weight`` over its series' ``unit`` (None stays None)."""
    if weight is None:
        return None
    return weight / np.repeat(unit(weight, offsets), np.diff(offsets))


def unit(weight: np.ndarray | None, offsets: np.ndarray, counts: np.ndarray | None = None,
         sums: np.ndarray | None = None) -> np.ndarray:
    """(S,) each series' mean weight over its rows of positive weight (``counts``: their number, ``sums``:
    each series' total weight, where known): the weight of the planned week.

    1 unweighted, and for a series whose weights are all 0 or whose sum overflows: it has no model
    (``reasons.NO_WEIGHT``, ``WEIGHT_OVERFLOW``)."""
    if weight is None:
        return np.ones(len(offsets) - 1)
    counts = weighed_counts(weight, offsets) if counts is None else counts
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        mean = (segment_sums(weight, _bounds(offsets))[:, 0] if sums is None else sums) / counts
    return np.where(np.isfinite(mean) & (mean > 0), mean, 1.0)


def _bounds(offsets: np.ndarray) -> np.ndarray:
    return np.stack([offsets[:-1], offsets[1:]], axis=1)
