"""Lanes of general Gram matrices: the fits whose design holds controls beside the price terms.

As in ``lanes`` (the lane index last, every loop over lanes innermost), but the
Gram matrix of a lane is any symmetric matrix, given packed: the lower
triangle of the (Q + 1) × (Q + 1) moment matrix of the columns
[1, controls…, price terms…, response], row by row (``tri``).  Its last row holds
the cross products with the response and its last entry the response's sum of
squares.

The columns come in that order on purpose (Frisch–Waugh–Lovell): the
intercept and the controls are eliminated first, so the trailing block of the
Cholesky factor is the factor of the price terms with the controls partialled
out, and the leading block of size (1 + controls + k) serves the candidate
with k price terms.  One factorisation serves every degree, as without controls.

A control that adds nothing to the columns before it in a lane's training rows
(constant there, or a combination of the other controls) is *dropped* from that
lane: its scale is set to 0 and its row and column of the factor to the
identity's, so its coefficient, its part of every leverage and its part of the
condition bound are exactly 0, and the fit is the fit without it.
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled
from .lanes import CANCEL_RATIO, RANK_TOL

# A control whose squared pivot on the unit-diagonal Gram matrix falls below this is dropped from a
# lane: what is left of it after the intercept and the controls before it is under 1e-6 of its sum of
# squares (R² above 1 − 1e-6), too little to estimate an effect of its own with the digits a fit keeps.
CONTROL_TOL = 1e-6


@compiled(inline=True)
def tri(i, k):
    """Position of entry (i, k), k ≤ i, in a packed lower triangle."""
    return i * (i + 1) // 2 + k


@compiled
def factor_gram(packed, q, n_nuis, lower, scale, good, cond, recip, inverse, work):
    """Cholesky of each lane's Jacobi-scaled Gram matrix (the leading q columns of ``packed``), with
    dropped controls, rank marks and condition bounds.

    Columns ``0 … n_nuis − 1`` are the intercept and the controls; the rest are price terms.
    ``good[k]``: the leading k + 1 columns can be fitted (the intercept is there; every price term up to
    k adds something new); a control failing ``CONTROL_TOL`` is dropped (see the module) and leaves
    ``good`` as it was.  ``cond[k]``: ‖G‖_F·‖L⁻¹‖_F² of the leading (k + 1) block over the columns kept.
    Other outputs as ``lanes.factor``; ``inverse`` (Q, Q, N) and ``work`` (2, N) are scratch.
    """
    n = packed.shape[1]
    for k in range(q):
        d, sk = packed[tri(k, k)], scale[k]
        for l in range(n):
            sk[l] = 1.0 / np.sqrt(d[l]) if d[l] > 0 else 0.0
    pivot = work[0]
    for k in range(q):
        d, sk, gk, rk, lkk = packed[tri(k, k)], scale[k], good[k], recip[k], lower[k, k]
        for l in range(n):
            pivot[l] = d[l] * sk[l] * sk[l]
        for m in range(k):
            lkm = lower[k, m]
            for l in range(n):
                pivot[l] -= lkm[l] * lkm[l]
        if k == 0:
            for l in range(n):
                gk[l] = d[l] > 0 and pivot[l] > RANK_TOL
        elif k < n_nuis:  # a control: kept or dropped, the fit goes on either way
            earlier = good[k - 1]
            for l in range(n):
                gk[l] = earlier[l]
                if not (d[l] > 0 and pivot[l] > CONTROL_TOL):
                    sk[l] = 0.0
                    pivot[l] = 1.0
                    for m in range(k):
                        lower[k, m, l] = 0.0
        else:
            earlier = good[k - 1]
            for l in range(n):
                gk[l] = d[l] > 0 and pivot[l] > RANK_TOL and earlier[l]
        for l in range(n):
            usable = gk[l] and sk[l] > 0
            root = np.sqrt(pivot[l]) if usable else 1.0
            lkk[l] = root
            rk[l] = 1.0 / root
        for i in range(k + 1, q):
            si, g_ik, lik = scale[i], packed[tri(i, k)], lower[i, k]
            for l in range(n):
                lik[l] = g_ik[l] * si[l] * sk[l]
            for m in range(k):
                lim, lkm = lower[i, m], lower[k, m]
                for l in range(n):
                    lik[l] -= lim[l] * lkm[l]
            for l in range(n):
                lik[l] = lik[l] * rk[l] if gk[l] and sk[l] > 0 else 0.0
        for i in range(k):
            lower[i, k, :] = 0.0
    gram_sq, inv_sq = work[0], work[1]
    gram_sq[:] = 0.0
    inv_sq[:] = 0.0
    for i in range(q):
        ri, iii, si = recip[i], inverse[i, i], scale[i]
        for l in range(n):
            iii[l] = ri[l]
        for j in range(i):
            acc = inverse[i, j]
            acc[:] = 0.0
            for m in range(j, i):
                lim, imj = lower[i, m], inverse[m, j]
                for l in range(n):
                    acc[l] += lim[l] * imj[l]
            for l in range(n):
                acc[l] = -acc[l] * iii[l]
        for j in range(i + 1):
            g_ij, sj, iij = packed[tri(i, j)], scale[j], inverse[i, j]
            twice = j != i
            for l in range(n):
                g = g_ij[l] * si[l] * sj[l]
                gram_sq[l] += 2.0 * g * g if twice else g * g
                if si[l] > 0 and sj[l] > 0:  # a dropped control's unit diagonal is not part of the fit
                    inv_sq[l] += iij[l] * iij[l]
        ci = cond[i]
        for l in range(n):
            ci[l] = np.sqrt(gram_sq[l]) * inv_sq[l]


@compiled
def unpack_cross(packed, q, out):
    """``out[k, lane]`` = the lane's cross product of column k with the response (the packed last row)."""
    for k in range(q):
        src, dst = packed[tri(q, k)], out[k]
        for l in range(packed.shape[1]):
            dst[l] = src[l]


@compiled
def squared_error_gram(coef, size, packed, q, out, loose, work):
    """Σw·(y − Σ coef[k]·xₖ)² = yᵀy − 2bᵀXᵀy + bᵀXᵀXb from the packed moments of the rows it is measured
    on (``lanes.squared_error`` for a general Gram matrix); ``loose`` as there.  ``work`` (3, N)."""
    n = coef.shape[1]
    linear, quad, inner = work[0], work[1], work[2]
    linear[:] = 0.0
    quad[:] = 0.0
    for k in range(size):
        bk, xk, gkk = coef[k], packed[tri(q, k)], packed[tri(k, k)]
        for l in range(n):
            linear[l] += bk[l] * xk[l]
            inner[l] = 0.5 * bk[l] * gkk[l]
        for m in range(k + 1, size):
            bm, gmk = coef[m], packed[tri(m, k)]
            for l in range(n):
                inner[l] += bm[l] * gmk[l]
        for l in range(n):
            quad[l] += 2.0 * bk[l] * inner[l]
    squares = packed[tri(q, q)]
    for l in range(n):
        sse = squares[l] - 2.0 * linear[l] + quad[l]
        loose[l] = sse < CANCEL_RATIO * (squares[l] + 2.0 * abs(linear[l]) + quad[l])
        out[l] = max(sse, 0.0)
