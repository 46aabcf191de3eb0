"""Many small least-squares problems at once, one *lane* each: the lane index is the last axis.

Every loop over lanes is innermost and runs over contiguous memory, so the
compiler turns it into vector instructions (several lanes per instruction),
while each lane's arithmetic stays in the order a one-problem loop would use:
results are the same, bit for bit, as solving the problems one at a time, on
any machine.  A lane is one fit: one series, one fold (``kernels.family_fit``).

Shapes: ``sums`` (2P − 1, N) power sums Σw·xᵏ of each lane's training rows
(its Gram matrix is the Hankel matrix G[i, j] = sums[i + j]), ``lower``
(P, P, N), vectors (P, N).
"""
from __future__ import annotations

import numpy as np

from ..compiled import compiled

# A held-out error below this fraction of the terms it is computed from has
# lost most of its digits to cancellation: recompute it from the rows.
CANCEL_RATIO = 1e-7

# A squared Cholesky pivot below this (on a unit-diagonal Gram matrix) means
# the column adds nothing the earlier ones do not already span.  Exactly
# singular matrices leave pivots near 1e-13 after rounding.
RANK_TOL = 1e-10


@compiled
def factor(sums, p, lower, scale, good, cond, recip, inverse, work):
    """Cholesky of each lane's Jacobi-scaled Hankel Gram matrix, with rank marks and condition bounds.

    Fills ``lower`` (L Lᵀ = D G D, D = diag(G)^-½), ``scale`` (diag of D),
    ``recip`` (1 / diagonal of L), ``good[k]`` (column k and all before it are
    independent) and ``cond[k]`` (‖G‖_F·‖L⁻¹‖_F² of the leading (k + 1) block,
    a bound on its condition number).  A failed column is dropped (unit pivot,
    zeros below), so every leading block before the first failure is exact.
    ``inverse`` (P, P, N) and ``work`` (2, N) are scratch.
    """
    n = sums.shape[1]
    for k in range(p):
        d, sk = sums[2 * k], scale[k]
        for l in range(n):
            sk[l] = 1.0 / np.sqrt(d[l]) if d[l] > 0 else 0.0
    pivot = work[0]
    for k in range(p):
        d, sk, gk, rk, lkk = sums[2 * k], scale[k], good[k], recip[k], lower[k, k]
        for l in range(n):
            pivot[l] = d[l] * sk[l] * sk[l]
        for m in range(k):
            lkm = lower[k, m]
            for l in range(n):
                pivot[l] -= lkm[l] * lkm[l]
        earlier = good[max(k - 1, 0)]
        for l in range(n):
            gk[l] = d[l] > 0 and pivot[l] > RANK_TOL and (k == 0 or earlier[l])
        for l in range(n):
            root = np.sqrt(pivot[l]) if gk[l] else 1.0
            lkk[l] = root
            rk[l] = 1.0 / root
        for i in range(k + 1, p):
            si, s_ik, lik = scale[i], sums[i + k], lower[i, k]
            for l in range(n):
                lik[l] = s_ik[l] * si[l] * sk[l]
            for m in range(k):
                lim, lkm = lower[i, m], lower[k, m]
                for l in range(n):
                    lik[l] -= lim[l] * lkm[l]
            for l in range(n):
                lik[l] = lik[l] * rk[l] if gk[l] else 0.0
        for i in range(k):
            lower[i, k, :] = 0.0
    # Frobenius norms of the leading blocks of G and of L⁻¹, a row at a time.
    gram_sq, inv_sq = work[0], work[1]
    gram_sq[:] = 0.0
    inv_sq[:] = 0.0
    for i in range(p):
        ri, iii = recip[i], inverse[i, i]
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
            s_ij, si, sj, iij = sums[i + j], scale[i], scale[j], inverse[i, j]
            twice = j != i
            for l in range(n):
                g = s_ij[l] * si[l] * sj[l]
                gram_sq[l] += 2.0 * g * g if twice else g * g
                inv_sq[l] += iij[l] * iij[l]
        ci = cond[i]
        for l in range(n):
            ci[l] = np.sqrt(gram_sq[l]) * inv_sq[l]


@compiled
def forward(rhs, p, lower, scale, recip, z):
    """z = L⁻¹·D·rhs in every lane (``rhs`` (P, N): Σw·xᵏ·y of the training rows)."""
    n = rhs.shape[1]
    for i in range(p):
        zi, bi, si, ri = z[i], rhs[i], scale[i], recip[i]
        for l in range(n):
            zi[l] = bi[l] * si[l]
        for k in range(i):
            lik, zk = lower[i, k], z[k]
            for l in range(n):
                zi[l] -= lik[l] * zk[l]
        for l in range(n):
            zi[l] *= ri[l]


@compiled
def back(z, size, lower, scale, recip, coef):
    """Coefficients of the leading ``size`` powers in every lane: coef = D·L⁻ᵀz (leading block), 0 past it.

    ``coef`` (P, N): the fit in powers of the mapped variable.
    """
    n = z.shape[1]
    p = coef.shape[0]
    for i in range(size - 1, -1, -1):
        ci, zi, ri = coef[i], z[i], recip[i]
        for l in range(n):
            ci[l] = zi[l]
        for k in range(i + 1, size):
            lki, ck = lower[k, i], coef[k]
            for l in range(n):
                ci[l] -= lki[l] * ck[l]
        for l in range(n):
            ci[l] *= ri[l]
    for k in range(size):
        ck, sk = coef[k], scale[k]
        for l in range(n):
            ck[l] *= sk[l]
    for k in range(size, p):
        coef[k, :] = 0.0


@compiled
def squared_error(coef, size, sums, cross, squares, out, loose, work):
    """Σw·(y − Σ coef[k]·xᵏ)² = yᵀy − 2bᵀXᵀy + bᵀXᵀXb from moments of the rows it is measured on.

    ``coef`` (P, N) with ``size`` leading powers; ``sums`` (2P − 1, N),
    ``cross`` (P, N) Σw·xᵏ·y and ``squares`` (N,) Σw·y² of those rows.
    ``loose[l]`` becomes True where the result is below ``CANCEL_RATIO`` of
    the terms it came from (most digits lost): those rows must be summed
    directly.  ``work`` (3, N) is scratch.
    """
    n = coef.shape[1]
    linear, quad, inner = work[0], work[1], work[2]
    linear[:] = 0.0
    quad[:] = 0.0
    for k in range(size):
        bk, xk, s2k = coef[k], cross[k], sums[2 * k]
        for l in range(n):
            linear[l] += bk[l] * xk[l]
            inner[l] = 0.5 * bk[l] * s2k[l]
        for m in range(k + 1, size):
            bm, skm = coef[m], sums[k + m]
            for l in range(n):
                inner[l] += bm[l] * skm[l]
        for l in range(n):
            quad[l] += 2.0 * bk[l] * inner[l]
    for l in range(n):
        sse = squares[l] - 2.0 * linear[l] + quad[l]
        loose[l] = sse < CANCEL_RATIO * (squares[l] + 2.0 * abs(linear[l]) + quad[l])
        out[l] = max(sse, 0.0)
