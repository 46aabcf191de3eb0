"""The compiled least-squares loops: fold moments, fits in lanes, held-out errors, Cook's distances.

One pass over each series' rows sums its blocks' power moments in registers;
its fits (one a fold, and one on all rows) then become lanes of a group of
series, factored and solved together (``lanes``).
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled
from . import lanes
from .basis import leverage

# Above this condition number of the scaled Gram matrix a solve through it
# keeps fewer than 8 significant digits (error ≈ condition × 1.1e-16); such
# a fit is too unstable to trust and is marked unavailable instead.
COND_LIMIT = 1e8

# Fits solved together, one lane each (``lanes``): enough for long vector
# loops, few enough that a group's work arrays stay in the core's caches.
LANE_TARGET = 512


@compiled
def _block_moments(x, y, w, weighted, bounds, m, p, sums, cross, squares):
    """Per block b of one series (rows ``bounds[b]:bounds[b + 1]``): Σw·xᵏ (k < m) into
    ``sums[b]``, Σw·xᵏ·y (k < p) into ``cross[b]``, Σw·y² into ``squares[b]``.

    Scalar accumulators keep the loop in registers: a straight line (p = 2,
    the log-log fit) has its own short loop; otherwise every power up to 10
    (degree 5) is summed and those past what the caller asked for dropped.
    """
    for b in range(len(bounds) - 1):
        if p <= 2:
            s0 = s1 = s2 = t0 = t1 = yy = 0.0
            for i in range(bounds[b], bounds[b + 1]):
                wi = w[i] if weighted else 1.0
                xi = x[i]
                wy = wi * y[i]
                s0 += wi
                s1 += wi * xi
                s2 += wi * (xi * xi)
                t0 += wy
                t1 += wy * xi
                yy += wy * y[i]
            line = (s0, s1, s2)
            for k in range(m):
                sums[b, k] = line[k]
            first = (t0, t1)
            for k in range(p):
                cross[b, k] = first[k]
            squares[b] = yy
            continue
        s0 = s1 = s2 = s3 = s4 = s5 = s6 = s7 = s8 = s9 = s10 = 0.0
        t0 = t1 = t2 = t3 = t4 = t5 = 0.0
        yy = 0.0
        for i in range(bounds[b], bounds[b + 1]):
            wi = w[i] if weighted else 1.0
            xi = x[i]
            x2 = xi * xi
            x3 = x2 * xi
            x4 = x2 * x2
            x5 = x4 * xi
            wy = wi * y[i]
            s0 += wi
            s1 += wi * xi
            s2 += wi * x2
            s3 += wi * x3
            s4 += wi * x4
            s5 += wi * x5
            s6 += wi * (x3 * x3)
            s7 += wi * (x4 * x3)
            s8 += wi * (x4 * x4)
            s9 += wi * (x5 * x4)
            s10 += wi * (x5 * x5)
            t0 += wy
            t1 += wy * xi
            t2 += wy * x2
            t3 += wy * x3
            t4 += wy * x4
            t5 += wy * x5
            yy += wy * y[i]
        everything = (s0, s1, s2, s3, s4, s5, s6, s7, s8, s9, s10)
        for k in range(m):
            sums[b, k] = everything[k]
        crossed = (t0, t1, t2, t3, t4, t5)
        for k in range(p):
            cross[b, k] = crossed[k]
        squares[b] = yy


@compiled
def _row_errors(x, y, w, weighted, bounds, fold_of_block, degrees, coef, power, acc):
    """One series' weighted squared errors from its rows: ``acc[f, j]`` held out in fold f,
    ``acc[F, j]`` in sample; ``coef`` (F + 1, D, P) as ``family_fit`` writes it.

    The fits are summed in rising powers of x (not by ``basis.horner``'s rule): the
    errors of near-exact fits recomputed here are round-off, and the recorded fixed fits pin them.
    """
    n_folds = coef.shape[0] - 1
    p = coef.shape[2]
    acc[:] = 0.0
    for b in range(len(bounds) - 1):
        f = fold_of_block[b]
        for i in range(bounds[b], bounds[b + 1]):
            wi = w[i] if weighted else 1.0
            power[0] = 1.0
            for k in range(1, p):
                power[k] = power[k - 1] * x[i]
            for j in range(len(degrees)):
                full = 0.0
                held = 0.0
                for k in range(degrees[j] + 1):
                    full += coef[n_folds, j, k] * power[k]
                    if f >= 0:
                        held += coef[f, j, k] * power[k]
                r = y[i] - full
                acc[n_folds, j] += wi * r * r
                if f >= 0:
                    r = y[i] - held
                    acc[f, j] += wi * r * r


@compiled
def trains_on(f, b, held_out, cumulative):
    """Whether fit ``f`` (``len(held_out)`` = the fit on all rows) trains on block ``b``."""
    if f == len(held_out):
        return True
    return b != held_out[f] and not (cumulative and b > held_out[f])


@compiled
def _lane_sums(values, member, held_block, first, train, held):
    """One series' lanes ``first``, ``first + 1``, …, one per fit f: ``train[k, lane]`` = Σ values[b, k]
    over the blocks b fit f trains on (``member[f, b]``), ``held[k, lane]`` = values[held_block[f], k]."""
    for k in range(values.shape[1]):
        for f in range(member.shape[0]):
            total = 0.0
            for b in range(member.shape[1]):
                if member[f, b]:
                    total += values[b, k]
            train[k, first + f] = total
            held[k, first + f] = values[held_block[f], k]


@compiled
def _degree_results(j, size, s0, count, beta, err, loose, good, cond, train_rows, z, total_yy,
                    group_coef, ok, sse_test, sse_full, suspect):
    """Degree j (``size`` coefficients) of a group's series s0, s0 + 1, …: coefficients into
    ``group_coef``, whether each fit is usable, held-out and in-sample errors, and which series'
    errors lost their digits to cancellation (``suspect``: to be summed from their rows)."""
    n_fits = group_coef.shape[1]
    n_folds = n_fits - 1
    for q in range(count):
        s = s0 + q
        for f in range(n_fits):
            lane = q * n_fits + f
            for k in range(beta.shape[0]):
                group_coef[q, f, j, k] = beta[k, lane]
            fine = good[size - 1, lane] and cond[size - 1, lane] <= COND_LIMIT and train_rows[lane] > size - 1
            if f < n_folds:
                ok[s, f, j] = fine
                sse_test[s, f, j] = err[lane] if fine else np.nan  # NaN: never used, unavailable
                suspect[q] = suspect[q] or (fine and loose[lane])
            else:
                fine = fine and train_rows[lane] > size
                ok[s, f, j] = fine
                fitted = 0.0
                for k in range(size):
                    fitted += z[k, lane] * z[k, lane]
                sse = total_yy[q] - fitted
                suspect[q] = suspect[q] or (fine and sse < lanes.CANCEL_RATIO * total_yy[q])
                sse_full[s, j] = max(sse, 0.0)


@compiled
def family_fit(x, y, w, bounds, held_out, cumulative, degrees, p,
               coef, ok, sse_test, w_test, sse_full, w_full, tss, tss_test, lower_full, scale_full):
    """Every degree on every fold of every series; outputs as ``polyfit.FamilyFit`` (series first).

    ``w``: weights, or an empty array for unit weights.  ``coef`` holds every
    fit (S, F + 1, D, P) or the fit on all rows only (S, 1, D, P).  Series go in groups;
    each fit of a group (a series and a fold, or all its rows) is one lane of
    ``lanes``: its training moments are summed from the series' block
    moments, then every lane is factored and solved at once.
    """
    n_series = bounds.shape[0]
    n_blocks = bounds.shape[1] - 1
    n_folds = len(held_out)
    n_fits = n_folds + 1
    n_deg = len(degrees)
    m = 2 * p - 1
    weighted = len(w) > 0
    group = max(1, LANE_TARGET // n_fits)
    n_lanes = group * n_fits
    blk = np.zeros((group, n_blocks, m))
    bxy = np.zeros((group, n_blocks, p))
    byy = np.zeros((group, n_blocks))
    train = np.zeros((m, n_lanes))
    txy = np.zeros((p, n_lanes))
    train_rows = np.zeros(n_lanes)
    held = np.zeros((m, n_lanes))
    hxy = np.zeros((p, n_lanes))
    hyy = np.zeros(n_lanes)
    lower = np.zeros((p, p, n_lanes))
    inverse = np.zeros((p, p, n_lanes))
    scale = np.zeros((p, n_lanes))
    recip = np.ones((p, n_lanes))
    good = np.zeros((p, n_lanes), dtype=np.bool_)
    cond = np.zeros((p, n_lanes))
    z = np.zeros((p, n_lanes))
    beta = np.zeros((p, n_lanes))
    err = np.zeros(n_lanes)
    loose = np.zeros(n_lanes, dtype=np.bool_)
    work = np.zeros((3, n_lanes))
    total_yy = np.zeros(group)
    suspect = np.zeros(group, dtype=np.bool_)
    power = np.zeros(m)
    fold_of_block = np.full(n_blocks, -1)
    for f in range(n_folds):
        fold_of_block[held_out[f]] = f
    member = np.zeros((n_fits, n_blocks), dtype=np.bool_)
    held_block = np.zeros(n_fits, dtype=np.int64)  # the full fit's held-out error is never used
    for f in range(n_fits):
        for b in range(n_blocks):
            member[f, b] = trains_on(f, b, held_out, cumulative)
        if f < n_folds:
            held_block[f] = held_out[f]
    acc = np.zeros((n_folds + 1, n_deg))
    group_coef = np.zeros((group, n_fits, n_deg, p))
    every_fit = coef.shape[1] == n_fits
    for s0 in range(0, n_series, group):
        count = min(group, n_series - s0)
        for q in range(count):
            s = s0 + q
            _block_moments(x, y, w, weighted, bounds[s], m, p, blk[q], bxy[q], byy[q])
            total_yy[q] = 0.0
            for b in range(n_blocks):
                total_yy[q] += byy[q, b]
            first = q * n_fits
            _lane_sums(blk[q], member, held_block, first, train, held)
            _lane_sums(bxy[q], member, held_block, first, txy, hxy)
            for f in range(n_fits):
                total = 0.0
                for b in range(n_blocks):
                    if member[f, b]:
                        total += bounds[s, b + 1] - bounds[s, b]
                train_rows[first + f] = total
                hyy[first + f] = byy[q, held_block[f]]
        lanes.factor(train, p, lower, scale, good, cond, recip, inverse, work)
        lanes.forward(txy, p, lower, scale, recip, z)
        suspect[:] = False
        for j in range(n_deg):
            size = degrees[j] + 1
            lanes.back(z, size, lower, scale, recip, beta)
            lanes.squared_error(beta, size, held, hxy, hyy, err, loose, work)
            _degree_results(j, size, s0, count, beta, err, loose, good, cond, train_rows, z, total_yy,
                            group_coef, ok, sse_test, sse_full, suspect)
        for q in range(count):
            s = s0 + q
            full = q * n_fits + n_folds
            for i in range(p):
                scale_full[s, i] = scale[i, full]
                for k in range(p):
                    lower_full[s, i, k] = lower[i, k, full]
            for f in range(n_fits):
                if every_fit or f == n_folds:
                    for j in range(n_deg):
                        for k in range(p):
                            coef[s, f if every_fit else 0, j, k] = group_coef[q, f, j, k]
            if suspect[q]:
                _row_errors(x, y, w, weighted, bounds[s], fold_of_block, degrees, group_coef[q], power, acc)
                for j in range(n_deg):
                    sse_full[s, j] = acc[n_folds, j]
                    for f in range(n_folds):
                        sse_test[s, f, j] = acc[f, j]
            total_w = 0.0
            held_yy = 0.0
            for b in range(n_blocks):
                total_w += blk[q, b, 0]
            for f in range(n_folds):
                w_test[s, f] = blk[q, held_out[f], 0]
                held_yy += byy[q, held_out[f]]
            w_full[s] = total_w
            tss[s] = total_yy[q]
            tss_test[s] = held_yy


@compiled
def influence_rows(x, target, w, offsets, order, coef, size, lower, scale, sigma2, top, first):
    """The largest Cook's distance among the rows of each series with ``size[s] > 0``.

    Per row: residual target − Σ coef[s, k]·xᵏ (k < size[s]), leverage
    h = wᵢ·xᵢᵀ(XᵀWX)⁻¹xᵢ (scaled factor ``lower``, ``scale``), Cook's distance
    wᵢeᵢ²h / (p·s²·(1 − h)²).  ``top[s]`` gets the largest distance and
    ``first[s]`` the first dataset position ``order[i]`` holding it.
    """
    weighted = len(w) > 0
    p = lower.shape[1]
    longest = 0
    for s in range(len(size)):
        longest = max(longest, offsets[s + 1] - offsets[s])
    # A series' rows are the lanes of the evaluation and of the triangular solves.
    v = np.zeros((p, longest))
    h = np.zeros((p, longest))
    power = np.zeros(longest)
    fitted = np.zeros(longest)
    for s in range(len(size)):
        k_size = size[s]
        if k_size <= 0:
            continue
        start = offsets[s]
        n = offsets[s + 1] - start
        rows = x[start:start + n]
        for i in range(n):  # rising powers, as the recorded fixed fits pin (see ``_row_errors``)
            power[i] = 1.0
            fitted[i] = 0.0
        for r in range(k_size):
            b_r = coef[s, r]
            for i in range(n):
                fitted[i] += b_r * power[i]
                power[i] *= rows[i]
        leverage(rows, lower[s], scale[s], k_size, power, v, h, 0)
        spread = h[k_size - 1]
        best = -1.0
        where = -1
        for i in range(n):
            wi = w[start + i] if weighted else 1.0
            hi = spread[i] * wi
            e = target[start + i] - fitted[i]
            d = wi * e * e * hi / (k_size * sigma2[s] * (1.0 - hi) ** 2)
            at = order[start + i]
            if not np.isnan(d) and (d > best or (d == best and at < where)):
                best = d
                where = at
        top[s] = best
        first[s] = where
