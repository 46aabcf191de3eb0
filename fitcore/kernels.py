"""Compiled per-series loops (numba) for the work numpy cannot batch cheaply.

A series' rows, its fold moments and its ≤ 6 × 6 Gram matrices fit in
registers and L1 cache, so one compiled pass per series replaces dozens of
numpy passes over the chunk.  Elementwise transcendental functions stay in
numpy, whose SIMD ``exp``/``log`` run ~4× faster than scalar calls here.

Compiled on first use and cached beside this file (or in the user's cache
when that is read-only): the first run after an install takes a few seconds
longer.  ``error_model="numpy"``: a division by zero gives inf or NaN, as in
numpy, for the caller to mask, instead of raising.
"""
from __future__ import annotations

import functools

import numpy as np

_PLAIN = {}  # name → the Python function, compiled on the first call of any kernel


def njit(**options):
    """``numba.njit(**options)``, applied when a kernel is first called.

    Importing ``fitcore`` (say, to open a results file) then costs no numba
    import (~0.2 s).  On that first call every kernel here is compiled (or
    loaded from the cache) and bound in this module, so compiled kernels
    call one another directly.
    """
    def register(fn):
        _PLAIN[fn.__name__] = (fn, options)

        @functools.wraps(fn)
        def first_call(*args):
            _compile_all()
            return globals()[fn.__name__](*args)
        return first_call
    return register


def _compile_all() -> None:
    import numba
    for name, (fn, options) in _PLAIN.items():
        if not isinstance(globals()[name], numba.core.registry.CPUDispatcher):
            globals()[name] = numba.njit(**options)(fn)

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


@njit(cache=True, nogil=True, error_model="numpy")
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


@njit(cache=True, nogil=True, error_model="numpy")
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


@njit(cache=True, nogil=True, error_model="numpy")
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


@njit(cache=True, nogil=True, error_model="numpy")
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
                if f < n_folds and (b == held_out[f] or (cumulative and b > held_out[f])):
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


@njit(cache=True, nogil=True, error_model="numpy")
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


@njit(cache=True, nogil=True, error_model="numpy")
def _trains_on(f, b, held_out, cumulative):
    """Whether fit ``f`` (``len(held_out)`` = the fit on all rows) trains on block ``b``."""
    if f == len(held_out):
        return True
    return b != held_out[f] and not (cumulative and b > held_out[f])


@njit(cache=True, nogil=True, error_model="numpy")
def loglog_residuals(u, z, bounds, a, e, out):
    """``out[f, i]`` = zᵢ − a[s, f] − e[s, f]·uᵢ: the log-scale residual of row i under fit f of its series."""
    for s in range(bounds.shape[0]):
        for i in range(bounds[s, 0], bounds[s, -1]):
            for f in range(out.shape[0]):
                out[f, i] = z[i] - a[s, f] - e[s, f] * u[i]


@njit(cache=True, nogil=True, error_model="numpy")
def loglog_volume_errors(volume, w, bounds, held_out, cumulative, growth, smear, sse_full, sse_test):
    """Volume-scale errors of the log-log fits, with Duan's smearing factor per fit.

    ``growth[f, i]`` = exp(log residual of row i under fit f).  A fit's
    smearing factor is the weighted mean of its growths over its training rows;
    its prediction at row i is volumeᵢ / growth[f, i] × smear.
    """
    n_folds = len(held_out)
    weighted = len(w) > 0
    spread = np.zeros(n_folds + 1)
    weight = np.zeros(n_folds + 1)
    for s in range(bounds.shape[0]):
        spread[:] = 0.0
        weight[:] = 0.0
        for b in range(bounds.shape[1] - 1):
            for f in range(n_folds + 1):
                if _trains_on(f, b, held_out, cumulative):
                    for i in range(bounds[s, b], bounds[s, b + 1]):
                        wi = w[i] if weighted else 1.0
                        spread[f] += wi * growth[f, i]
                        weight[f] += wi
        for f in range(n_folds + 1):
            spread[f] = spread[f] / weight[f] if weight[f] > 0 else 1.0
        smear[s] = spread[n_folds]
        total = 0.0
        for i in range(bounds[s, 0], bounds[s, -1]):
            wi = w[i] if weighted else 1.0
            r = volume[i] - volume[i] / growth[n_folds, i] * spread[n_folds]
            total += wi * r * r
        sse_full[s] = total
        for f in range(n_folds):
            hb = held_out[f]
            total = 0.0
            for i in range(bounds[s, hb], bounds[s, hb + 1]):
                wi = w[i] if weighted else 1.0
                r = volume[i] - volume[i] / growth[f, i] * spread[f]
                total += wi * r * r
            sse_test[s, f] = total


@njit(cache=True, nogil=True, error_model="numpy")
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


@njit(cache=True, nogil=True, error_model="numpy")
def window_rows(x, y, w, offsets, use, t, centred, lo, hi, mean, y_low):
    """Per series: price window [lo, hi], x mapped onto [-1, 1] (0 for a single price), y less its
    weighted ``mean``, and the smallest y.  Series with ``use[s]`` False (when ``use`` is not
    empty) get zeros throughout."""
    weighted = len(w) > 0
    restricted = len(use) > 0
    for s in range(len(offsets) - 1):
        start, stop = offsets[s], offsets[s + 1]
        if restricted and not use[s]:
            for i in range(start, stop):
                t[i] = 0.0
                centred[i] = 0.0
            lo[s] = hi[s] = mean[s] = y_low[s] = 0.0
            continue
        small = np.inf
        large = -np.inf
        least = np.inf
        total_w = 0.0
        total_wy = 0.0
        for i in range(start, stop):
            wi = w[i] if weighted else 1.0
            small = min(small, x[i])
            large = max(large, x[i])
            least = min(least, y[i])
            total_w += wi
            total_wy += wi * y[i]
        mid = (small + large) / 2
        half = (large - small) / 2
        average = total_wy / (total_w if total_w > 0 else 1.0)
        for i in range(start, stop):
            t[i] = (x[i] - mid) / half if half > 0 else 0.0
            centred[i] = y[i] - average
        lo[s] = small
        hi[s] = large
        mean[s] = average
        y_low[s] = least


@njit(cache=True, nogil=True)
def _splitmix64(x):
    z = x + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


@njit(cache=True, nogil=True)
def shuffle_draws(offsets, key_hash, seed, packed, draws):
    """Row j of series s draws splitmix64(stream_s + j), stream_s = splitmix64(key_hash_s ^ splitmix64(seed)).

    Fills ``draws`` with the whole draws when it is not empty; otherwise
    ``packed`` with series (23 bits) | the draw's top 20 bits | j (20 bits),
    whose ascending order is the shuffled order of every series at once.
    """
    salt = _splitmix64(np.uint64(seed))
    whole = len(draws) > 0
    for s in range(len(offsets) - 1):
        start = offsets[s]
        stream = _splitmix64(key_hash[s] ^ salt)
        for j in range(offsets[s + 1] - start):
            draw = _splitmix64(stream + np.uint64(j))
            if whole:
                draws[start + j] = draw
            else:
                packed[start + j] = (s << 40) | (np.int64(draw >> np.uint64(44)) << 20) | j


@njit(cache=True, nogil=True, error_model="numpy")
def _poly_value(coef, s, t, order):
    """The ``order``-th derivative (0, 1 or 2) at t of Σ coef[s, k]·tᵏ."""
    p = coef.shape[1]
    value = 0.0
    for k in range(p - 1, order - 1, -1):
        factor = 1.0
        for m in range(order):
            factor *= k - m
        value = value * t + coef[s, k] * factor
    return value


@njit(cache=True, nogil=True, error_model="numpy")
def revenue_peak_poly(coef, mid, half, grid, out):
    """``out[s]``: the t in [-1, 1] maximising (mid + half·t) × Σ coef[s, k]·tᵏ.

    A grid of ``grid`` points finds the best cell (first maximum); Newton steps
    on d(revenue)/dt, kept inside the neighbouring cells and taken only when
    they raise revenue, make the optimum exact for a quadratic revenue
    (linear demand) and accurate to round-off for smooth ones.
    """
    step = 2.0 / (grid - 1)
    for s in range(coef.shape[0]):
        best = -np.inf
        t = -1.0
        for g in range(grid):
            tg = -1.0 + g * step if g < grid - 1 else 1.0
            revenue = (mid[s] + half[s] * tg) * _poly_value(coef, s, tg, 0)
            if revenue > best:
                best = revenue
                t = tg
        lo = max(t - step, -1.0)
        hi = min(t + step, 1.0)
        for _ in range(8):
            p = mid[s] + half[s] * t
            v = _poly_value(coef, s, t, 0)
            v1 = _poly_value(coef, s, t, 1)
            v2 = _poly_value(coef, s, t, 2)
            grad = half[s] * v + p * v1
            curv = 2 * half[s] * v1 + p * v2
            candidate = min(max(t - grad / curv, lo), hi)
            if curv < 0 and np.isfinite(candidate):
                if (mid[s] + half[s] * candidate) * _poly_value(coef, s, candidate, 0) >= p * v:
                    t = candidate
        out[s] = t
