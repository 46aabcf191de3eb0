"""The compiled least-squares loops: fold moments, scaled Cholesky, solves, held-out errors, leverages.

One pass per series (see ``compiled``): its rows, its fold moments and its
≤ 6 × 6 Gram matrices stay in registers and L1 cache.
"""
from __future__ import annotations

import numpy as np

from .compiled import compiled

# A squared Cholesky pivot below this (on a unit-diagonal Gram matrix) means
# the column adds nothing the earlier ones do not already span.  Exactly
# singular matrices leave pivots near 1e-13 after rounding.
RANK_TOL = 1e-10

# Above this condition number of the scaled Gram matrix a solve through it
# keeps fewer than 8 significant digits (error ≈ condition × 1.1e-16); such
# a fit is too unstable to trust and is marked unavailable instead.
COND_LIMIT = 1e8

# A held-out error below this fraction of the terms it is computed from has
# lost most of its digits to cancellation: recompute it from the rows.
CANCEL_RATIO = 1e-7


@compiled
def _block_moments(x, y, w, weighted, start, stop, m, p, sums, cross, squares, b):
    """Σw·xᵏ (k < m) into ``sums``, Σw·xᵏ·y (k < p) into ``cross``, Σw·y² into ``squares[b]``.

    Scalar accumulators keep the loop in registers: a straight line (p = 2,
    the log-log fit) has its own short loop; otherwise every power up to 10
    (degree 5) is summed and those past what the caller asked for dropped.
    """
    if p <= 2:
        s0 = s1 = s2 = t0 = t1 = yy = 0.0
        for i in range(start, stop):
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
            sums[k] = line[k]
        first = (t0, t1)
        for k in range(p):
            cross[k] = first[k]
        squares[b] = yy
        return
    s0 = s1 = s2 = s3 = s4 = s5 = s6 = s7 = s8 = s9 = s10 = 0.0
    t0 = t1 = t2 = t3 = t4 = t5 = 0.0
    yy = 0.0
    for i in range(start, stop):
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
        sums[k] = everything[k]
    crossed = (t0, t1, t2, t3, t4, t5)
    for k in range(p):
        cross[k] = crossed[k]
    squares[b] = yy


@compiled
def _row_errors(x, y, w, weighted, bounds, fold_of_block, degrees, coef, power, acc):
    """One series' weighted squared errors from its rows: ``acc[f, j]`` held out in fold f,
    ``acc[F, j]`` in sample; ``coef`` (F + 1, D, P) as ``family_fit`` writes it."""
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
def _factor(sums, p, lower, scale, good, cond, inverse, recip):
    """Cholesky of the Jacobi-scaled Hankel Gram G[i, j] = sums[i + j] (Σw·xᵏ).

    Fills ``lower`` (L Lᵀ = D G D, D = diag(G)^-½), ``scale`` (diag of D),
    ``recip`` (1 / diagonal of L), ``good[k]`` (column k and all before it are independent) and ``cond[k]``
    (‖G‖_F·‖L⁻¹‖_F² of the leading (k + 1) block, a bound on its condition).
    A failed column is dropped (unit pivot, zeros below), so every leading
    block before the first failure is exact.
    """
    for k in range(p):
        d = sums[2 * k]
        scale[k] = 1.0 / np.sqrt(d) if d > 0 else 0.0
    for k in range(p):
        pivot = sums[2 * k] * scale[k] * scale[k]
        for m in range(k):
            pivot -= lower[k, m] * lower[k, m]
        ok = sums[2 * k] > 0 and pivot > RANK_TOL and (k == 0 or good[k - 1])
        good[k] = ok
        root = np.sqrt(pivot) if ok else 1.0
        lower[k, k] = root
        recip[k] = 1.0 / root
        for i in range(k + 1, p):
            if ok:
                value = sums[i + k] * scale[i] * scale[k]
                for m in range(k):
                    value -= lower[i, m] * lower[k, m]
                lower[i, k] = value * recip[k]
            else:
                lower[i, k] = 0.0
        for i in range(k):
            lower[i, k] = 0.0
    # Frobenius norms of the leading blocks of G and of L⁻¹, a row at a time.
    gram_sq = 0.0
    inv_sq = 0.0
    inverse[:] = 0.0
    for i in range(p):
        inverse[i, i] = recip[i]
        for j in range(i):
            acc = 0.0
            for m in range(j, i):
                acc += lower[i, m] * inverse[m, j]
            inverse[i, j] = -acc * inverse[i, i]
        for j in range(i + 1):
            g = sums[i + j] * scale[i] * scale[j]
            gram_sq += g * g if j == i else 2.0 * g * g
            inv_sq += inverse[i, j] * inverse[i, j]
        cond[i] = np.sqrt(gram_sq) * inv_sq


@compiled
def trains_on(f, b, held_out, cumulative):
    """Whether fit ``f`` (``len(held_out)`` = the fit on all rows) trains on block ``b``."""
    if f == len(held_out):
        return True
    return b != held_out[f] and not (cumulative and b > held_out[f])


@compiled
def family_fit(x, y, w, bounds, held_out, cumulative, degrees, p,
               coef, ok, sse_test, w_test, sse_full, w_full, tss, tss_test, lower_full, scale_full):
    """Every degree on every fold of every series; outputs as ``polyfit.FamilyFit`` (series first).

    ``w``: weights, or an empty array for unit weights.
    """
    n_series = bounds.shape[0]
    n_blocks = bounds.shape[1] - 1
    n_folds = len(held_out)
    n_deg = len(degrees)
    m = 2 * p - 1
    weighted = len(w) > 0
    blk = np.zeros((n_blocks, m))
    bxy = np.zeros((n_blocks, p))
    byy = np.zeros(n_blocks)
    rows = np.zeros(n_blocks)
    power = np.zeros(m)
    train = np.zeros(m)
    txy = np.zeros(p)
    lower = np.zeros((p, p))
    scale = np.zeros(p)
    good = np.zeros(p, dtype=np.bool_)
    cond = np.zeros(p)
    z = np.zeros(p)
    beta = np.zeros(p)
    inverse = np.zeros((p, p))
    recip = np.zeros(p)
    fold_of_block = np.full(n_blocks, -1)
    for f in range(n_folds):
        fold_of_block[held_out[f]] = f
    acc = np.zeros((n_folds + 1, n_deg))
    for s in range(n_series):
        blk[:] = 0.0
        bxy[:] = 0.0
        byy[:] = 0.0
        for b in range(n_blocks):
            rows[b] = bounds[s, b + 1] - bounds[s, b]
            _block_moments(x, y, w, weighted, bounds[s, b], bounds[s, b + 1], m, p, blk[b], bxy[b], byy, b)
        total_rows = 0.0
        for b in range(n_blocks):
            total_rows += rows[b]
        for f in range(n_folds + 1):
            train[:] = 0.0
            txy[:] = 0.0
            train_rows = 0.0
            for b in range(n_blocks):
                if not trains_on(f, b, held_out, cumulative):
                    continue
                train_rows += rows[b]
                for k in range(m):
                    train[k] += blk[b, k]
                for k in range(p):
                    txy[k] += bxy[b, k]
            _factor(train, p, lower, scale, good, cond, inverse, recip)
            for i in range(p):
                value = txy[i] * scale[i]
                for k in range(i):
                    value -= lower[i, k] * z[k]
                z[i] = value * recip[i]
            for j in range(n_deg):
                size = degrees[j] + 1
                for i in range(size - 1, -1, -1):
                    value = z[i]
                    for k in range(i + 1, size):
                        value -= lower[k, i] * beta[k]
                    beta[i] = value * recip[i]
                for k in range(p):
                    coef[s, f, j, k] = beta[k] * scale[k] if k < size else 0.0
                fine = good[size - 1] and cond[size - 1] <= COND_LIMIT and train_rows > size - 1
                if f == n_folds:
                    fine = fine and total_rows > size
                ok[s, f, j] = fine
        for i in range(p):
            scale_full[s, i] = scale[i]
            for k in range(p):
                lower_full[s, i, k] = lower[i, k]
        # Errors from the moments: yᵀy − 2bᵀXᵀy + bᵀXᵀXb on each fold's held-out block.  That
        # cancels when a fit is nearly exact; such a series has its errors summed from its rows.
        suspect = False
        total_yy = 0.0
        for b in range(n_blocks):
            total_yy += byy[b]
        for f in range(n_folds + 1):
            for j in range(n_deg):
                size = degrees[j] + 1
                if f < n_folds and not ok[s, f, j]:
                    sse_test[s, f, j] = np.nan  # never used: the candidate is unavailable
                elif f < n_folds:
                    hb = held_out[f]
                    yy = byy[hb]
                    cross = 0.0
                    quad = 0.0
                    for k in range(size):
                        bk = coef[s, f, j, k]
                        cross += bk * bxy[hb, k]
                        inner = 0.5 * bk * blk[hb, 2 * k]
                        for l in range(k + 1, size):
                            inner += coef[s, f, j, l] * blk[hb, k + l]
                        quad += 2.0 * bk * inner
                    sse = yy - 2.0 * cross + quad
                    if sse < CANCEL_RATIO * (yy + 2.0 * abs(cross) + quad):
                        suspect = True
                    sse_test[s, f, j] = max(sse, 0.0)
                else:
                    fitted = 0.0
                    for k in range(size):
                        fitted += z[k] * z[k]  # z of the full fit, the last one solved
                    sse = total_yy - fitted
                    if ok[s, f, j] and sse < CANCEL_RATIO * total_yy:
                        suspect = True
                    sse_full[s, j] = max(sse, 0.0)
        if suspect:
            _row_errors(x, y, w, weighted, bounds[s], fold_of_block, degrees, coef[s], power, acc)
            for j in range(n_deg):
                sse_full[s, j] = acc[n_folds, j]
                for f in range(n_folds):
                    sse_test[s, f, j] = acc[f, j]
        total_w = 0.0
        held_yy = 0.0
        for b in range(n_blocks):
            total_w += blk[b, 0]
        for f in range(n_folds):
            w_test[s, f] = blk[held_out[f], 0]
            held_yy += byy[held_out[f]]
        w_full[s] = total_w
        tss[s] = total_yy
        tss_test[s] = held_yy


@compiled
def leverage_rows(x, lower, scale, series, sizes, out):
    """xᵢᵀ(XᵀWX)⁻¹xᵢ = ‖L⁻¹Dxᵢ‖² at each point, from scaled Cholesky factors (S, P, P), (S, P).

    With ``sizes`` empty, ``out`` is (P, N): the leverage under the leading
    1, 2, …, P coefficients; otherwise ``out`` is (1, N): under ``sizes[i]``.
    """
    p = lower.shape[1]
    own = len(sizes) > 0
    v = np.zeros(p)
    for i in range(len(x)):
        s = series[i]
        top = min(p, sizes[i]) if own else p
        power = 1.0
        total = 0.0
        for r in range(top):
            value = power * scale[s, r]
            for c in range(r):
                value -= lower[s, r, c] * v[c]
            v[r] = value / lower[s, r, r]
            total += v[r] * v[r]
            if not own:
                out[r, i] = total
            power *= x[i]
        if own:
            out[0, i] = total


@compiled
def influence_rows(x, target, w, offsets, order, coef, size, lower, scale, sigma2, top, first):
    """The largest Cook's distance among the rows of each series with ``size[s] > 0``.

    Per row: residual target − Σ coef[s, k]·xᵏ (k < size[s]), leverage
    h = wᵢ‖L⁻¹Dxᵢ‖² (scaled factor ``lower``, ``scale``), Cook's distance
    wᵢeᵢ²h / (p·s²·(1 − h)²).  ``top[s]`` gets the largest distance and
    ``first[s]`` the first dataset position ``order[i]`` holding it.
    """
    weighted = len(w) > 0
    p = lower.shape[1]
    v = np.zeros(p)
    for s in range(len(size)):
        k_size = size[s]
        if k_size <= 0:
            continue
        best = -1.0
        where = -1
        for i in range(offsets[s], offsets[s + 1]):
            wi = w[i] if weighted else 1.0
            power = 1.0
            fitted = 0.0
            h = 0.0
            for r in range(k_size):
                fitted += coef[s, r] * power
                value = power * scale[s, r]
                for c in range(r):
                    value -= lower[s, r, c] * v[c]
                v[r] = value / lower[s, r, r]
                h += v[r] * v[r]
                power *= x[i]
            h *= wi
            e = target[i] - fitted
            d = wi * e * e * h / (k_size * sigma2[s] * (1.0 - h) ** 2)
            at = order[i]
            if not np.isnan(d) and (d > best or (d == best and at < where)):
                best = d
                where = at
        top[s] = best
        first[s] = where
