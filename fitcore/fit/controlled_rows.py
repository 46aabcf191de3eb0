"""Row by row with controls: leverages of the full design, Cook's distances, the log families' volume errors.

The design of a fit with controls is [1, controls…, t, t², …] (``gram_lanes``);
a row's leverage under the leading r + 1 columns is ‖L⁻¹D·x‖² over them, for
every r at once (as ``basis.leverage`` for powers of t alone).  The log
families' held-out volume errors need each fold's smearing factor from its
own training rows; with controls a fold's fit differs from the full fit in
every control too, so the exponentials are summed row by row (one per row
and fit) rather than from ``logvolume``'s Taylor moments in t.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled
from .kernels import trains_on


@compiled(inline=True)
def _leverage_rows(t, z, lower, scale, n_nuis, a, n, columns, v, power, out, at):
    """``out[r, at + i]`` = leverage of point a + i under the leading r + 1 columns (r < ``columns``) of one
    fit's design (``lower`` (Q, Q), ``scale`` (Q,)); points are the lanes.  ``v`` (Q, ≥ n), ``power``
    (≥ n) scratch."""
    for i in range(n):
        power[i] = 1.0
    for r in range(columns):
        d_r, l_rr, vr, orow = scale[r], lower[r, r], v[r], out[r]
        if r == 0:
            for i in range(n):
                vr[i] = d_r
        elif r < n_nuis:
            for i in range(n):
                vr[i] = z[r - 1, a + i] * d_r
        else:
            for i in range(n):
                power[i] *= t[a + i]
                vr[i] = power[i] * d_r
        for c in range(r):
            l_rc, vc = lower[r, c], v[c]
            for i in range(n):
                vr[i] -= l_rc * vc[i]
        for i in range(n):
            vr[i] = vr[i] / l_rr
        if r == 0:
            for i in range(n):
                orow[at + i] = vr[i] * vr[i]
        else:
            before = out[r - 1]
            for i in range(n):
                orow[at + i] = before[at + i] + vr[i] * vr[i]


@compiled
def _design_leverage(t, z, lower, scale, n_nuis, bounds, out):
    longest = 0
    for s in range(len(bounds) - 1):
        longest = max(longest, bounds[s + 1] - bounds[s])
    v = np.zeros((lower.shape[1], longest))
    power = np.zeros(longest)
    for s in range(len(bounds) - 1):
        a = bounds[s]
        _leverage_rows(t, z, lower[s], scale[s], n_nuis, a, bounds[s + 1] - a, lower.shape[1], v, power, out, a)


def design_leverages(t: np.ndarray, z: np.ndarray, lower: np.ndarray, scale: np.ndarray,
                     bounds: np.ndarray | None = None) -> np.ndarray:
    """(Q, N) xᵀ(XᵀWX)⁻¹x under the leading 1, 2, …, Q columns of [1, z…, t, t², …] at points (``t`` (N,),
    ``z`` (m, N) centred controls); fit s (``lower`` (S, Q, Q), ``scale`` (S, Q)) serves points
    ``bounds[s]:bounds[s + 1]`` (default: one point each).  The candidate with k price terms reads
    row m + k."""
    t = np.ascontiguousarray(t, dtype=np.float64)
    bounds = np.arange(len(t) + 1, dtype=np.int64) if bounds is None else np.asarray(bounds, dtype=np.int64)
    out = np.empty((lower.shape[1], len(t)))
    _design_leverage(t, np.ascontiguousarray(z, dtype=np.float64), np.ascontiguousarray(lower),
                     np.ascontiguousarray(scale), len(z) + 1, bounds, out)
    return out


def fitted_controls(gamma: np.ndarray, z: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """(N,) Σⱼ gamma[s, j]·z[j, i] over each series' rows (``gamma`` (S, m), ``z`` (m, N))."""
    return np.einsum("jn,nj->n", z, np.repeat(gamma, counts, axis=0)) if len(z) else np.zeros(z.shape[1])


@compiled
def influence_rows(t, target, z, w, offsets, order, coef, gamma, size, lower, scale, sigma2, n_coef, top, first):
    """``kernels.influence_rows`` with controls: the largest Cook's distance among each series' rows under
    its chosen curve, the residual less Σγ·z, the leverage of the full design (``size[s]`` leading
    columns, 0: skip), and ``n_coef[s]`` coefficients in the distance."""
    weighted = len(w) > 0
    m = z.shape[0]
    q = lower.shape[1]
    longest = 0
    for s in range(len(size)):
        longest = max(longest, offsets[s + 1] - offsets[s])
    lev = np.zeros((q, longest))
    v = np.zeros((q, longest))
    power = np.zeros(longest)
    p = coef.shape[1]
    for s in range(len(size)):
        if size[s] <= 0:
            continue
        a, b = offsets[s], offsets[s + 1]
        _leverage_rows(t, z, lower[s], scale[s], m + 1, a, b - a, size[s], v, power, lev, 0)
        spread = lev[size[s] - 1]
        best = -1.0
        where = -1
        for i in range(a, b):
            fitted = 0.0
            rise = 1.0
            for k in range(p):
                fitted += coef[s, k] * rise
                rise *= t[i]
            for j in range(m):
                fitted += gamma[s, j] * z[j, i]
            wi = w[i] if weighted else 1.0
            h = spread[i - a] * wi
            e = target[i] - fitted
            d = wi * e * e * h / (n_coef[s] * sigma2[s] * (1.0 - h) ** 2)
            at = order[i]
            if not np.isnan(d) and (d > best or (d == best and at < where)):
                best = d
                where = at
        top[s] = best
        first[s] = where


@compiled
def log_residuals(u, y, z, bounds, a, e, g, out, coef, acc):
    """``out[i, f]``: the log-scale residual of row i of series s under fit f (F folds, then the full fit in
    column F; ``out`` (N, 8): up to 7 folds, the fits side by side so each row's run together in vector
    instructions): yᵢ − a[s, f] − e[s, f]·uᵢ − Σⱼ g[s, f, j]·z[j, i].  ``coef`` (m + 2, 8), ``acc`` (8,)
    scratch."""
    m = z.shape[0]
    n_fits = a.shape[1]
    lanes = out.shape[1]
    for s in range(bounds.shape[0]):
        for f in range(lanes):
            fit = f < n_fits
            coef[0, f] = a[s, f] if fit else 0.0
            coef[1, f] = e[s, f] if fit else 0.0
            for j in range(m):
                coef[2 + j, f] = g[s, f, j] if fit else 0.0
        level, slope = coef[0], coef[1]
        for i in range(bounds[s, 0], bounds[s, -1]):
            ui = u[i]
            yi = y[i]
            for f in range(lanes):
                acc[f] = yi - level[f] - slope[f] * ui
            for j in range(m):
                zji = z[j, i]
                cj = coef[2 + j]
                for f in range(lanes):
                    acc[f] -= cj[f] * zji
            row = out[i]
            for f in range(lanes):
                row[f] = acc[f]


@compiled
def volume_errors(volume, w, bounds, held_out, cumulative, growth, smear, sse_full, sse_test, block_sums):
    """``logvolume.volume_errors`` from every fit's growths: ``growth[i, f]`` = exp(log residual of row i
    under fit f); a fit's smearing factor is the weighted mean of its growths over its training rows.
    ``block_sums`` (B, 8 + 1) scratch: each block's Σw·growth under every fit, then its Σw."""
    n_folds = len(held_out)
    n_blocks = bounds.shape[1] - 1
    weighted = len(w) > 0
    lanes = growth.shape[1]
    for s in range(bounds.shape[0]):
        for b in range(n_blocks):
            sums = block_sums[b]
            for f in range(lanes + 1):
                sums[f] = 0.0
            for i in range(bounds[s, b], bounds[s, b + 1]):
                wi = w[i] if weighted else 1.0
                row = growth[i]
                for f in range(lanes):
                    sums[f] += wi * row[f]
                sums[lanes] += wi
        for f in range(n_folds + 1):
            spread = 0.0
            weight = 0.0
            for b in range(n_blocks):
                if trains_on(f, b, held_out, cumulative):
                    spread += block_sums[b, f]
                    weight += block_sums[b, lanes]
            fit_smear = spread / weight if weight > 0 else 1.0
            total = 0.0
            if f == n_folds:
                smear[s] = fit_smear
                rows_from, rows_to = bounds[s, 0], bounds[s, -1]
            else:
                rows_from, rows_to = bounds[s, held_out[f]], bounds[s, held_out[f] + 1]
            for i in range(rows_from, rows_to):
                wi = w[i] if weighted else 1.0
                r = volume[i] - volume[i] / growth[i, f] * fit_smear
                total += wi * r * r
            if f == n_folds:
                sse_full[s] = total
            else:
                sse_test[s, f] = total
