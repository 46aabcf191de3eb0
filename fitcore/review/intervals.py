"""What a candidate's prediction interval needs at a new price, for many series at once.

A signed curve must give an interval at any later price without the rows it was fitted on:
the unscaled covariance (XᵀWX)⁻¹ of its coefficients in its own basis, its residual variance
σ² and degrees of freedom.  ``covariances`` computes the first for a block of series from their
rows (each family's weighted power sums Σw·tᵏ in one compiled pass, factored as the engine
factors its fits: ``lanes.factor``), or reads it where results were stored with it
(``StoredResults``); ``candidate_covariances`` gives a block's candidate by candidate, (n, k, k)
each, for the Parquet column to take without a padded copy.  With controls, the matrix of the curve at
the plan's control values (``Results.coef`` holds it there): Mᵀ·C·M from the full design's C, so its
interval at any price is the one the engine gives at the plan price (``_controlled_covariances``).
``last_dates`` gives each series' last date.  Checked against statsmodels' ``normalized_cov_params`` in
``tests/fitcore/test_snapshot.py``.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled, readonly
from ..fit.results import Results
from ..fit.weights import relative

BLOCK = 4096  # series factored at once (bounds the lanes' work arrays)


@compiled
def _power_sums(x, w, offsets, series, mid, half, order, out):
    """``out[k, i]`` = Σ wⱼ·tⱼᵏ over the rows j of series ``series[i]``, k < ``order``, where
    tⱼ = (xⱼ − mid[i]) / half[i] (half taken as 1 where it is not above 0), as ``basis.mapped`` maps it:
    the rows are read where they lie, with no gathered copy of them."""
    weighted = len(w) > 0
    sums = np.empty(order)  # a series' sums summed here, in L1, and stored once (2× faster than in ``out``)
    for i in range(len(series)):
        s = series[i]
        width = half[i] if half[i] > 0 else 1.0
        for k in range(order):
            sums[k] = 0.0
        for j in range(offsets[s], offsets[s + 1]):
            t = (x[j] - mid[i]) / width
            power = w[j] if weighted else 1.0
            for k in range(order):
                sums[k] += power
                power *= t
        for k in range(order):
            out[k, i] = sums[k]


def _unscaled_block(sums: np.ndarray, p: int) -> np.ndarray:
    """(n, k, k) for k = 1…p: (XᵀWX)⁻¹ of the leading k columns, from sums (2p − 1, n); NaN where
    a column is dependent on the earlier ones.  The leading block of L⁻¹ inverts the leading block of L."""
    from ..fit.lanes import factor
    n = sums.shape[1]
    lower, inverse = np.zeros((p, p, n)), np.zeros((p, p, n))
    scale, recip, cond = np.zeros((p, n)), np.ones((p, n)), np.zeros((p, n))
    good = np.zeros((p, n), dtype=np.bool_)
    factor(np.ascontiguousarray(sums), p, lower, scale, good, cond, recip, inverse, np.zeros((3, n)))
    inv = np.moveaxis(inverse, -1, 0)  # (n, P, P), lower triangular
    d = scale.T  # (n, P)
    return inv, d, good.T


def covariances(results: Results, series: np.ndarray) -> np.ndarray:
    """(len(series), C, P, P) the unscaled covariance of every candidate in its basis (NaN where
    the candidate is unavailable, past its size, or the results hold neither rows nor stored values)."""
    series = np.asarray(series, dtype=np.int64)
    n_c, width = len(results.candidates), results.lineup.width
    stored = getattr(results, "stored_cov", None)
    if stored is not None:
        return stored.cells(series)
    out = np.full((len(series), n_c, width, width), np.nan)
    if not results.rows_loaded or not len(series):
        return out
    for start in range(0, len(series), BLOCK):
        block = series[start:start + BLOCK]
        for c, cov in candidate_covariances(results, block):
            k = cov.shape[-1]
            out[start:start + len(block), c, :k, :k] = np.where(results.available[block, c][:, None, None], cov, np.nan)
    return out


def candidate_covariances(results: Results, block: np.ndarray):
    """Yield ``(c, cov)`` for every candidate c in order: ``cov`` (len(block), k, k) its unscaled covariance
    (k its size) for the series ``block`` (≤ ``BLOCK`` of them), NaN where a column is dependent on the
    earlier ones or the results hold neither rows nor stored values; availability is not applied."""
    block = np.asarray(block, dtype=np.int64)
    sizes = results.lineup.complexity
    if getattr(results, "stored_cov", None) is not None or not results.rows_loaded or not len(block):
        cells = covariances(results, block)
        for c in range(len(results.candidates)):
            yield c, cells[:, c, :sizes[c], :sizes[c]]
        return
    if getattr(results, "controls", None) is not None:
        yield from _controlled_covariances(results, block)
        return
    price, weight, local = _block_rows(results.data, block)
    regressors = {}  # each family's regressor at the block's rows, computed once for the block
    for family, cols in results.lineup.groups:
        p = int(sizes[cols].max())
        if family.regressor not in regressors:
            with np.errstate(divide="ignore", invalid="ignore"):
                regressors[family.regressor] = np.ascontiguousarray(family.x(price), dtype=np.float64)
        # Every candidate of a family shares its window (mid, half).
        sums = np.empty((2 * p - 1, len(block)))
        _power_sums(readonly(regressors[family.regressor]), readonly(weight), readonly(local),
                    readonly(np.arange(len(block), dtype=np.int64)),
                    readonly(np.ascontiguousarray(results.basis_mid[block, cols.start], dtype=np.float64)),
                    readonly(np.ascontiguousarray(results.basis_half[block, cols.start], dtype=np.float64)), 2 * p - 1,
                    sums)
        inv, d, good = _unscaled_block(sums, p)
        for c in range(cols.start, cols.stop):
            k = int(sizes[c])
            lead = inv[:, :k, :k] * d[:, None, :k]  # L⁻¹·D on the leading k columns
            cov = np.einsum("nij,nik->njk", lead, lead)  # D·L⁻ᵀ·L⁻¹·D
            yield c, np.where(good[:, k - 1, None, None], cov, np.nan)


def _controlled_covariances(results: Results, block: np.ndarray):
    """``candidate_covariances`` with controls: Mᵀ·C·M, C = (XᵀWX)⁻¹ of the leading m + k columns of the
    full design [1, z…, t, …] (factored as the engine factors it: ``gram_lanes.factor_gram``, its dropped
    controls included) and M taking the k powers u of t to [1, z₀…, t, …], z₀ the plan's centred control
    values (0 where left out), so uᵀ·cov·u is the full design's leverage at the plan's controls, as at
    the plan price (``stages.at_plan``); written as ‖(L⁻¹D·M)u‖²."""
    from ..fit.basis import mapped
    from ..fit.controlled import design_moments
    from ..fit.controls import KEPT, chunk_controls
    from ..fit.gram_lanes import factor_gram
    from .control_evidence import control_values
    data, ctl, sizes = results.data, results.controls, results.lineup.complexity
    price, weight, local = _block_rows(results.data, block)
    m, n = len(ctl.names), len(block)
    rows = chunk_controls(control_values(results, rows_of(data.offsets, block)), weight if len(weight) else None,
                          local, np.full((n, m), np.nan))  # centred as the engine centres them
    kept = np.asarray(ctl.left_out)[block] == KEPT
    offset = np.where(kept, np.asarray(ctl.plan, dtype=float)[block] - rows.mean, 0.0)  # (n, m)
    for family, cols in results.lineup.groups:
        p = int(sizes[cols].max())
        q = 1 + m + p - 1
        with np.errstate(divide="ignore", invalid="ignore"):
            x = np.asarray(family.x(price), dtype=np.float64)
        # Every candidate of a family shares its window (mid, half).
        t = mapped(x, np.repeat(results.basis_mid[block, cols.start], np.diff(local)),
                   np.repeat(results.basis_half[block, cols.start], np.diff(local)))
        packed = np.empty((n, (q + 1) * (q + 2) // 2))
        design_moments(readonly(t), readonly(np.zeros(len(t))), readonly(rows.z), readonly(weight), len(weight) > 0,
                       readonly(local), p, m + 1, packed, np.zeros(q + 1))
        lower, inverse = np.zeros((q, q, n)), np.zeros((q, q, n))
        scale, recip, good = np.zeros((q, n)), np.ones((q, n)), np.zeros((q, n), dtype=np.bool_)
        factor_gram(np.ascontiguousarray(packed.T), q, m + 1, lower, scale, good, np.zeros((q, n)), recip, inverse,
                    np.zeros((2, n)))
        a = np.moveaxis(inverse, -1, 0) * scale.T[:, None, :]  # (n, Q, Q) L⁻¹·D
        for c in range(cols.start, cols.stop):
            k = int(sizes[c])
            lead = a[:, :m + k, :m + k]
            b = np.concatenate((lead[:, :, :1] + np.einsum("nij,nj->ni", lead[:, :, 1:m + 1], offset)[:, :, None],
                                lead[:, :, m + 1:]), axis=2)  # L⁻¹D·M, (n, m + k, k)
            cov = np.einsum("nij,nik->njk", b, b)
            yield c, np.where(good[m + k - 1, :, None, None], cov, np.nan)


def _block_rows(data, block: np.ndarray):
    """(price, weight or empty, offsets) of the rows of series ``block``, the weights over each series' mean
    positive weight (``weights.relative``), the offsets counted from the first of them: a view where the block
    is a run of consecutive series (the usual case), else a copy."""
    weight = np.empty(0) if data.weight is None else data.weight
    if len(block) and block[-1] - block[0] + 1 == len(block) and np.all(np.diff(block) == 1):
        lo, hi = int(data.offsets[block[0]]), int(data.offsets[block[-1] + 1])
        local = np.ascontiguousarray(data.offsets[block[0]:block[-1] + 2] - lo)
        return data.price[lo:hi], relative(weight[lo:hi], local) if len(weight) else weight, local
    rows = rows_of(data.offsets, block)
    local = np.concatenate(([0], np.cumsum(data.counts[block]))).astype(np.int64)
    return data.price[rows], relative(weight[rows], local) if len(weight) else weight, local


def rows_of(offsets: np.ndarray, series: np.ndarray) -> np.ndarray:
    """The dataset rows of ``series``, series by series (no Python loop over the series)."""
    counts = offsets[series + 1] - offsets[series]
    starts = np.repeat(offsets[series] - np.concatenate(([0], np.cumsum(counts)[:-1])), counts)
    return starts + np.arange(int(counts.sum()))


def last_dates(results: Results) -> np.ndarray | None:
    """(S,) datetime64[D] each series' last date (NaT for a series without rows); None without a
    date column."""
    stored = getattr(results, "stored_last_date", None)
    if stored is not None:
        return stored
    data = results.data
    if data.date is None or not results.rows_loaded:
        return None
    days = data.date.astype("datetime64[D]").view(np.int64)
    out = np.full(data.n_series, np.iinfo(np.int64).min)
    has = data.counts > 0
    if has.any():
        out[has] = np.maximum.reduceat(days, data.offsets[:-1][has])
    return out.view("datetime64[D]")
