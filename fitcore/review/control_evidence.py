"""One series' controls, for its evidence: its design with the controls, leverages, adjusted volumes.

With controls a candidate's design is [1, controls…, t, t², …] (``fit.gram_lanes``)
and ``Results.coef`` holds its price curve at the plan's control values, so a
new point's leverage is that of [1, the plan's values (centred), t, …] and a
row's residual takes its own control values off.  Here the series' controls are
read from the dataset (the columns, and the season terms from its dates),
centred on the series' mean as the engine centres them, and factored as the
engine factors its fits, on demand for the one series looked at.
"""
from __future__ import annotations

import numpy as np

from ..fit.controlled_rows import design_leverages
from ..fit.controls import KEPT, season_terms
from ..fit.gram_lanes import factor_gram, tri
from ..fit.results import Results
from ..fit.weights import relative


def control_rows(results: Results, s: int) -> np.ndarray:
    """(M, n) the series' rows' value of every control term (dataset order)."""
    return control_values(results, slice(results.data.offsets[s], results.data.offsets[s + 1]))


def control_values(results: Results, rows) -> np.ndarray:
    """(M, n) every control term at dataset ``rows`` (a slice or an index array)."""
    data, ctl = results.data, results.controls
    columns = ctl.names[:len(ctl.names) - 2 * ctl.season]
    date = data.date[rows] if ctl.season else None
    out = np.empty((len(ctl.names), len(data.price[rows])))
    for j, name in enumerate(columns):
        out[j] = data.controls[name][rows]
    if ctl.season:
        season_terms(date, ctl.season, out[len(columns):])
    return out


def centred(results: Results, s: int) -> tuple[np.ndarray, np.ndarray]:
    """(M, n) the series' control rows centred on their (weighted) mean, 0 where left out; (M,) the means."""
    raw = control_rows(results, s)
    data = results.data
    weight = None if data.weight is None else relative(data.weight[data.offsets[s]:data.offsets[s + 1]],
                                                       np.array([0, int(data.counts[s])]))
    mean = np.average(raw, axis=1, weights=weight) if raw.shape[1] else np.zeros(len(raw))
    kept = np.asarray(results.controls.left_out[s]) == KEPT
    return np.where(kept[:, None], raw - mean[:, None], 0.0), mean


def plan_offsets(results: Results, s: int, mean: np.ndarray) -> np.ndarray:
    """(M,) the plan's control values less the series' means, 0 where left out."""
    kept = np.asarray(results.controls.left_out[s]) == KEPT
    return np.where(kept, np.asarray(results.controls.plan[s]) - mean, 0.0)


def design_factor(t: np.ndarray, z: np.ndarray, w: np.ndarray | None, size: int):
    """The scaled Cholesky factor (Q, Q) and scale (Q,) of [1, z…, t, …, t^(size − 1)] over one series' rows,
    as the engine's lanes factor it (``gram_lanes.factor_gram``: dropped controls included)."""
    m = len(z)
    columns = [np.ones(len(t)), *z, *[t ** k for k in range(1, size)]]
    design = np.column_stack(columns + [np.zeros(len(t))])  # the response's column: unused here
    weighted = design * (np.ones(len(t)) if w is None else w)[:, None]
    gram = design.T @ weighted
    q = m + size
    packed = np.array([gram[i, k] for i in range(q + 1) for k in range(i + 1)])[:, None]
    lower, inverse = np.zeros((q, q, 1)), np.zeros((q, q, 1))
    scale, recip, cond, work = np.zeros((q, 1)), np.ones((q, 1)), np.zeros((q, 1)), np.zeros((3, 1))
    factor_gram(packed, q, m + 1, lower, scale, np.zeros((q, 1), dtype=np.bool_), cond, recip, inverse, work)
    assert tri(q, q) == len(packed) - 1
    return np.ascontiguousarray(lower[:, :, 0]), np.ascontiguousarray(scale[:, 0])


def leverage(factor, t: np.ndarray, z: np.ndarray) -> np.ndarray:
    """xᵀ(XᵀWX)⁻¹x at points (``t`` (n,), ``z`` (m, n) centred controls) under the whole of ``factor``."""
    lower, scale = factor
    return design_leverages(t, z, lower[None], scale[None], np.array([0, len(t)]))[-1]


def adjusted(family, volume: np.ndarray, gamma: np.ndarray, raw: np.ndarray, plan: np.ndarray,
             kept: np.ndarray) -> np.ndarray:
    """Volumes moved to the plan's control values under a candidate's control coefficients ``gamma``
    (partial residuals): on the family's fit scale each row gains Σ γ·(plan − its own value)."""
    shift = np.where(kept[:, None], gamma[:, None] * (plan[:, None] - raw), 0.0).sum(axis=0)
    with np.errstate(divide="ignore", over="ignore"):
        return family.volume(family.response(volume) + shift, 1.0)
