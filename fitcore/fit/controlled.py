"""The compiled least-squares fits with controls: every degree on every fold of every series at once.

The design of a fit is [1, controls…, t, t², …] (``gram_lanes``: controls
first, so they are partialled out of the price terms, Frisch–Waugh–Lovell,
and one factorisation serves every degree).  One pass over each series' rows
sums each block's packed moments of those columns and the response; a fit's
training moments are the sums over its training blocks; its lanes are then
factored and solved together, and each degree's held-out error comes from
the held-out block's moments (summed again from the rows where that would
cancel, as without controls).  Controls reach here centred on their series
mean (``controls``), so the intercept is the curve at the series' average
controls.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled
from . import gram_lanes as G
from . import lanes
from .kernels import COND_LIMIT, trains_on

# Fits solved together: the packed moments of a 12-column design take 6× the room of a Hankel one,
# so fewer lanes keep a group's work arrays within a core's L2 cache.
LANE_TARGET = 512


@compiled
def design_moments(x, y, z, w, weighted, bounds, p, n_nuis, out, v):
    """Per block b of one series: ``out[b]`` = Σw·vᵢ·vⱼ (j ≤ i, packed as ``gram_lanes.tri``) over its
    rows, v = [1, z₀…, x, x², …, x^(p−1), y]; ``v`` is scratch (≥ n_nuis + p)."""
    m = n_nuis - 1
    width = n_nuis + p
    size = width * (width + 1) // 2
    for b in range(len(bounds) - 1):
        acc = out[b]
        for k in range(size):
            acc[k] = 0.0
        for i in range(bounds[b], bounds[b + 1]):
            wi = w[i] if weighted else 1.0
            v[0] = 1.0
            for j in range(m):
                v[1 + j] = z[j, i]
            power = 1.0
            for k in range(1, p):
                power *= x[i]
                v[m + k] = power
            v[width - 1] = y[i]
            at = 0
            for a in range(width):
                wa = wi * v[a]
                for c in range(a + 1):  # contiguous: vector instructions, no reordering of any sum
                    acc[at + c] += wa * v[c]
                at += a + 1


@compiled
def _fit_sums(values, held_out, cumulative, first, train, held):
    """One series' lanes ``first``, ``first + 1``, …, one per fit f (F folds, then all rows): ``train[k, lane]``
    its training rows' sum of moment k, ``held[k, lane]`` its held-out block's.  A fold's training sum is
    the series' total less the held-out block (k-fold), or the blocks before it (time folds)."""
    n_folds = len(held_out)
    n_blocks = values.shape[0]
    for k in range(values.shape[1]):
        total = 0.0
        for b in range(n_blocks):
            total += values[b, k]
        for f in range(n_folds):
            hb = held_out[f]
            if cumulative:
                before = 0.0
                for b in range(hb):
                    before += values[b, k]
                train[k, first + f] = before
            else:
                train[k, first + f] = total - values[hb, k]
            held[k, first + f] = values[hb, k]
        train[k, first + n_folds] = total
        held[k, first + n_folds] = 0.0


@compiled
def _row_errors(x, y, z, w, weighted, bounds, fold_of_block, degrees, coef, gamma, acc):
    """One series' weighted squared errors summed from its rows: ``acc[f, j]`` held out in fold f,
    ``acc[F, j]`` in sample; ``coef`` (F + 1, D, P) price part, ``gamma`` (F + 1, D, m) controls."""
    n_folds = coef.shape[0] - 1
    m = gamma.shape[2]
    acc[:] = 0.0
    for b in range(len(bounds) - 1):
        f = fold_of_block[b]
        for i in range(bounds[b], bounds[b + 1]):
            wi = w[i] if weighted else 1.0
            for j in range(len(degrees)):
                full = 0.0
                held = 0.0
                power = 1.0
                for k in range(degrees[j] + 1):
                    full += coef[n_folds, j, k] * power
                    if f >= 0:
                        held += coef[f, j, k] * power
                    power *= x[i]
                for c in range(m):
                    full += gamma[n_folds, j, c] * z[c, i]
                    if f >= 0:
                        held += gamma[f, j, c] * z[c, i]
                r = y[i] - full
                acc[n_folds, j] += wi * r * r
                if f >= 0:
                    r = y[i] - held
                    acc[f, j] += wi * r * r


@compiled
def controlled_fit(x, y, z, w, bounds, held_out, cumulative, degrees, p, coef, gamma, ok, sse_test, w_test,
                   sse_full, w_full, tss, tss_test, lower_full, scale_full, kept_full, vif, tied, redundant):
    """Every degree on every fold of every series with the controls ``z`` (m, N) in the design.

    Outputs as ``polyfit.FamilyFit``: ``coef`` (S, F + 1 or 1, D, P) the price part (intercept at the
    series' average controls, then powers of x), ``gamma`` (S, ·, D, m) the controls' coefficients (0
    where a fit dropped one), ``lower_full``, ``scale_full`` (S, Q, Q), (S, Q) the full fit's factor
    over [1, controls…, x, …] (Q = 1 + m + p − 1), ``kept_full`` (S,) the controls the full fit kept;
    from the full fit (p ≥ 2): ``vif``, ``tied``, ``redundant`` (S,), (S,), (S, m) as ``_tie``.
    """
    m = z.shape[0]
    n_nuis = 1 + m
    q = n_nuis + p - 1
    packed_size = (q + 1) * (q + 2) // 2
    n_series = bounds.shape[0]
    n_blocks = bounds.shape[1] - 1
    n_folds = len(held_out)
    n_fits = n_folds + 1
    n_deg = len(degrees)
    weighted = len(w) > 0
    group = max(1, LANE_TARGET // n_fits)
    n_lanes = group * n_fits
    blk = np.zeros((group, n_blocks, packed_size))
    train = np.zeros((packed_size, n_lanes))
    held = np.zeros((packed_size, n_lanes))
    train_rows = np.zeros(n_lanes)
    kept = np.zeros(n_lanes)
    lower = np.zeros((q, q, n_lanes))
    inverse = np.zeros((q, q, n_lanes))
    scale = np.zeros((q, n_lanes))
    recip = np.ones((q, n_lanes))
    good = np.zeros((q, n_lanes), dtype=np.bool_)
    cond = np.zeros((q, n_lanes))
    rhs = np.zeros((q, n_lanes))
    zz = np.zeros((q, n_lanes))
    err = np.zeros(n_lanes)
    loose = np.zeros(n_lanes, dtype=np.bool_)
    work = np.zeros((3, n_lanes))
    suspect = np.zeros(group, dtype=np.bool_)
    total_yy = np.zeros(group)
    v = np.zeros(q + 1)
    fold_of_block = np.full(n_blocks, -1)
    for f in range(n_folds):
        fold_of_block[held_out[f]] = f
    member = np.zeros((n_fits, n_blocks), dtype=np.bool_)
    for f in range(n_fits):
        for b in range(n_blocks):
            member[f, b] = trains_on(f, b, held_out, cumulative)
    acc = np.zeros((n_fits, n_deg))
    group_coef = np.zeros((group, n_fits, n_deg, p))
    group_gamma = np.zeros((group, n_fits, n_deg, m))
    betas = np.zeros((n_deg, q, n_lanes))  # every degree's solution in every lane, read out only where needed
    every_fit = coef.shape[1] == n_fits
    at_w, at_yy = G.tri(0, 0), G.tri(q, q)
    for s0 in range(0, n_series, group):
        count = min(group, n_series - s0)
        for qq in range(count):
            s = s0 + qq
            design_moments(x, y, z, w, weighted, bounds[s], p, n_nuis, blk[qq], v)
            total_yy[qq] = _block_total(blk[qq], at_yy)
            first = qq * n_fits
            _fit_sums(blk[qq], held_out, cumulative, first, train, held)
            for f in range(n_fits):
                total = 0.0
                for b in range(n_blocks):
                    if member[f, b]:
                        total += bounds[s, b + 1] - bounds[s, b]
                train_rows[first + f] = total
        G.factor_gram(train, q, n_nuis, lower, scale, good, cond, recip, inverse, work)
        G.unpack_cross(train, q, rhs)
        lanes.forward(rhs, q, lower, scale, recip, zz)
        for lane in range(n_lanes):
            total = 0.0
            for k in range(1, n_nuis):
                total += scale[k, lane] > 0
            kept[lane] = total
        suspect[:] = False
        for j in range(n_deg):
            d = degrees[j]
            size = n_nuis + d
            lanes.back(zz, size, lower, scale, recip, betas[j])
            G.squared_error_gram(betas[j], size, held, q, err, loose, work)
            for qq in range(count):
                s = s0 + qq
                for f in range(n_fits):
                    lane = qq * n_fits + f
                    coefficients = 1 + kept[lane] + d
                    fine = good[size - 1, lane] and cond[size - 1, lane] <= COND_LIMIT \
                        and train_rows[lane] > coefficients - 1
                    if f < n_folds:
                        ok[s, f, j] = fine
                        sse_test[s, f, j] = err[lane] if fine else np.nan
                        suspect[qq] = suspect[qq] or (fine and loose[lane])
                    else:
                        fine = fine and train_rows[lane] > coefficients
                        ok[s, f, j] = fine
                        fitted = 0.0
                        for k in range(size):
                            fitted += zz[k, lane] * zz[k, lane]
                        sse = total_yy[qq] - fitted
                        suspect[qq] = suspect[qq] or (fine and sse < lanes.CANCEL_RATIO * total_yy[qq])
                        sse_full[s, j] = max(sse, 0.0)
        for qq in range(count):
            s = s0 + qq
            for f in range(n_fits):  # coefficients of the fits kept, or of every fit to sum its errors again
                if every_fit or f == n_folds or suspect[qq]:
                    lane = qq * n_fits + f
                    for j in range(n_deg):
                        group_coef[qq, f, j, 0] = betas[j, 0, lane]
                        for k in range(1, p):
                            group_coef[qq, f, j, k] = betas[j, m + k, lane] if k <= degrees[j] else 0.0
                        for c in range(m):
                            group_gamma[qq, f, j, c] = betas[j, 1 + c, lane]
            full = qq * n_fits + n_folds
            kept_full[s] = kept[full]
            _tie(train, lower, scale, good, full, n_nuis, p, s, vif, tied, redundant)
            for i in range(q):
                scale_full[s, i] = scale[i, full]
                for k in range(q):
                    lower_full[s, i, k] = lower[i, k, full]
            for f in range(n_fits):
                if every_fit or f == n_folds:
                    for j in range(n_deg):
                        for k in range(p):
                            coef[s, f if every_fit else 0, j, k] = group_coef[qq, f, j, k]
                        for c in range(m):
                            gamma[s, f if every_fit else 0, j, c] = group_gamma[qq, f, j, c]
            if suspect[qq]:
                _row_errors(x, y, z, w, weighted, bounds[s], fold_of_block, degrees, group_coef[qq],
                            group_gamma[qq], acc)
                for j in range(n_deg):
                    sse_full[s, j] = acc[n_folds, j]
                    for f in range(n_folds):
                        if ok[s, f, j]:
                            sse_test[s, f, j] = acc[f, j]
            held_yy = 0.0
            for f in range(n_folds):
                w_test[s, f] = blk[qq, held_out[f], at_w]
                held_yy += blk[qq, held_out[f], at_yy]
            w_full[s] = _block_total(blk[qq], at_w)
            tss[s] = total_yy[qq]
            tss_test[s] = held_yy


@compiled(inline=True)
def _block_total(blocks, at):
    """Σ over blocks of one packed moment."""
    total = 0.0
    for b in range(blocks.shape[0]):
        total += blocks[b, at]
    return total


@compiled(inline=True)
def _tie(packed, lower, scale, good, lane, n_nuis, p, s, vif, tied, redundant):
    """From the fit on all rows of series s (lane ``lane``): ``vif[s]`` the variance inflation of x given
    the controls kept (Σw(x − x̄)² over what is left of x after them; inf when nothing is, NaN for a
    constant x or p < 2), ``tied[s]`` the kept control most correlated with x (-1: none),
    ``redundant[s, j]`` control j was dropped though not constant (a combination of those before it)."""
    m = n_nuis - 1
    g00 = packed[G.tri(0, 0), lane]
    for j in range(m):
        redundant[s, j] = scale[1 + j, lane] == 0 and packed[G.tri(1 + j, 1 + j), lane] > 0
    vif[s] = np.nan
    tied[s] = -1
    if p < 2 or not g00 > 0:
        return
    t = n_nuis
    gt0 = packed[G.tri(t, 0), lane]
    spread = packed[G.tri(t, t), lane] - gt0 * gt0 / g00
    if not spread > 0:
        return
    st = scale[t, lane]
    vif[s] = spread / (lower[t, t, lane] / st) ** 2 if good[t, lane] and st > 0 else np.inf
    best = -1.0
    for j in range(m):
        if scale[1 + j, lane] > 0:
            gj0 = packed[G.tri(1 + j, 0), lane]
            own = packed[G.tri(1 + j, 1 + j), lane] - gj0 * gj0 / g00
            corr = abs(packed[G.tri(t, 1 + j), lane] - gt0 * gj0 / g00) / np.sqrt(spread * own) if own > 0 else 0.0
            if corr > best:
                best = corr
                tied[s] = j
