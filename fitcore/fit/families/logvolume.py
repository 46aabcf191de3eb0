"""Families fitted to ln volume: a straight line in a mapped regressor, judged in volume units.

ln volume = a + b·t, t the regressor (ln price for ``loglog``, price for
``semilog``) mapped onto [-1, 1], fitted by least squares on the log scale
(degree 1 through ``polyfit``).  They compete with the polynomials on one
scale: a held-out prediction is exp(fitted ln volume) × Duan's smearing
factor, the weighted mean of exp(residual) over the fit's training rows
(Duan 1983, J. Am. Stat. Assoc. 78:605–610).  Intervals are built on the log
scale and exponentiated.  A family here supplies its regressor, the series
it serves, its elasticity and its revenue-best price; the rest is shared.
"""
from __future__ import annotations

import numpy as np

from ...compiled import compiled, readonly
from .. import controlled_rows
from ..basis import window
from ..kernels import trains_on
from ..loo import lone_effect, loo_residuals
from ..polyfit import fit_family
from ..scores import along_folds
from ..segments import segment_sums
from ..weights import idle_positive
from .base import Candidate, Family, Fitted


class LogVolume(Family):
    """A family with one candidate, ln volume = a + b·t, named as the family and switched on by the
    fit setting of that name (``FitSettings.loglog``, ``FitSettings.semilog``)."""

    smeared = True

    def candidates(self, settings) -> tuple[Candidate, ...]:
        return (Candidate(self.name, self.name, None, 2),) if getattr(settings, self.name) else ()

    def fit(self, ch, candidates) -> Fitted:
        served = self.serves(ch)
        price, volume = idle_positive(ch.price, ch.weight), idle_positive(ch.volume, ch.weight)
        with np.errstate(divide="ignore", invalid="ignore"):  # rows of series not served: skipped
            u, z, lo, hi, zbar, _, _ = ch.windowed(self.x(price), np.log(volume), served)
        log = fit_family(u, z, ch.weight, ch.lay, (1,), fold_coefficients=True,
                         controls=None if ch.controls is None else ch.controls.z)
        held_out, held_ok, smear, sse = ch.scheme.held_out(self, (ch, u, z, log))
        centred = log.coef[:, -1, :1].copy()  # (S, 1, 2): the line in u of centred ln volume
        coef = centred.copy()
        coef[:, 0, 0] += zbar
        mid, half = window(lo, hi)
        return Fitted(coef=coef, mid=mid, half=half, fit_ok=log.ok[:, -1], held_ok=held_ok[:, None],
                      held_out=held_out[..., None], sse=sse[:, None], fit_sse=log.sse_full, smear=smear[:, None],
                      unserved=~served, lower=log.lower, scale=log.scale, rows=u, target=z, row_coef=centred,
                      gamma=None if log.gamma is None else log.gamma[:, -1], tie=log.tie)

    def fold_errors(self, work):
        """Each fold's volume errors, its smearing factor from its own training rows (``volume_errors``)."""
        ch, u, z, log = work
        if ch.controls is not None:
            return self._fold_errors_with_controls(work)
        lay = ch.lay
        a, e = log.coef[:, :, 0, 0], log.coef[:, :, 0, 1]  # (S, F + 1)
        growth = np.empty((2, len(u)))  # exp(log residual) of every row: under the full fit, under its fold's
        log_residuals(u, z, lay.bounds, lay.held_out.astype(np.int64), a, e, growth)
        with np.errstate(over="ignore"):  # an overflow is an inf held-out error: unavailable, with its reason
            np.exp(growth, out=growth)  # numpy's vectorised exp: ~4× a compiled scalar loop here
        n_s = len(ch.counts)
        sse_test, smear, sse_full = np.empty((n_s, lay.n_folds)), np.empty(n_s), np.empty(n_s)
        volume_errors(readonly(u), readonly(z), readonly(ch.volume),
                      readonly(np.empty(0) if ch.weight is None else ch.weight), readonly(lay.bounds),
                      readonly(lay.held_out.astype(np.int64)), lay.cumulative, readonly(a), readonly(e),
                      readonly(growth), smear, sse_full, sse_test)
        return sse_test, along_folds(log.ok[:, :-1, 0], np.logical_and), smear, sse_full

    def _fold_errors_with_controls(self, work):
        """Each fold's volume errors with controls: every fit's exp(log residual) of every row, the smearing
        factors summed from them row by row (``controlled_rows``)."""
        ch, u, z, log = work
        lay = ch.lay
        n_fits = lay.n_folds + 1
        lanes = 8 if n_fits <= 8 else n_fits  # the fits side by side, a vector's width when they fit in one
        growth = np.empty((len(u), lanes))
        controlled_rows.log_residuals(u, z, ch.controls.z, lay.bounds, np.ascontiguousarray(log.coef[:, :, 0, 0]),
                                      np.ascontiguousarray(log.coef[:, :, 0, 1]),
                                      np.ascontiguousarray(log.gamma[:, :, 0]), growth,
                                      np.zeros((len(ch.controls.z) + 2, lanes)), np.zeros(lanes))
        np.exp(growth, out=growth)
        n_s = len(ch.counts)
        sse_test, smear, sse_full = np.empty((n_s, lay.n_folds)), np.empty(n_s), np.empty(n_s)
        controlled_rows.volume_errors(readonly(ch.volume), readonly(np.empty(0) if ch.weight is None else ch.weight),
                                      readonly(lay.bounds), readonly(lay.held_out.astype(np.int64)), lay.cumulative,
                                      readonly(growth), smear, sse_full, sse_test,
                                      np.zeros((lay.bounds.shape[1] - 1, lanes + 1)))
        return sse_test, along_folds(log.ok[:, :-1, 0], np.logical_and), smear, sse_full

    def row_errors(self, work):
        """Leave-one-out, exactly as refitting without each row: its held-out ln volume from the hat
        matrix, and the smearing factor of the fit without it (``loo_smearing``)."""
        ch, u, z, log = work
        volume, w, counts = ch.volume, ch.weight, ch.counts
        a, e = log.coef[:, -1, 0, 0], log.coef[:, -1, 0, 1]
        weight = np.ones_like(volume) if w is None else w
        whole = ch.whole
        resid_full = z - np.repeat(a, counts) - np.repeat(e, counts) * u
        if ch.controls is not None:
            resid_full -= controlled_rows.fitted_controls(log.gamma[:, -1, 0], ch.controls.z, counts)
        with np.errstate(over="ignore"):
            full_exp = np.exp(resid_full)  # exp(residual) of the full fit
        total_w = segment_sums(weight, whole)[:, 0]
        smear = segment_sums(weight * full_exp, whole)[:, 0] / np.where(total_w > 0, total_w, 1.0)
        fitted = volume / full_exp
        sse_full = segment_sums(weight * (volume - fitted * np.repeat(smear, counts)) ** 2, whole)[:, 0]
        resid, defined = loo_residuals(u, z, w, ch.offsets, log, ch.controls)
        # A control's lone row is predicted by the fit without that control (``loo.lone_effect``), and a row
        # of leverage 1 has no prediction: both keep the full fit's other rows' smearing.
        plain = np.repeat(~defined[0], counts)
        if ch.controls is not None:
            lone, _ = lone_effect(ch.controls, log.gamma[:, -1, 0], log.scale[:, 1:len(ch.controls.z) + 1] > 0,
                                  len(u))
            plain |= lone
        controls = np.empty((0, len(u))) if ch.controls is None else ch.controls.z
        design = np.vstack([np.ones((1, len(u))), controls, u[None, :]])  # [1, controls…, regressor]
        smear_without = np.empty(len(u))
        with np.errstate(over="ignore", invalid="ignore"):  # rows of leverage 1: marked undefined later
            loo_smearing(readonly(design), readonly(resid_full), readonly(full_exp),
                         readonly(np.empty(0) if w is None else w), readonly(ch.offsets.astype(np.int64)),
                         readonly(np.ascontiguousarray(log.lower)), readonly(np.ascontiguousarray(log.scale)),
                         readonly(np.ascontiguousarray(resid[0])), readonly(plain), smear_without)
            held = volume * np.exp(-resid[0]) * smear_without
        return (volume - held) ** 2, along_folds(log.ok[:, :-1, 0], np.logical_and) & defined[0], smear, sse_full

    def response(self, volume):
        return np.log(volume)

    def volume(self, fitted, smear):
        with np.errstate(over="ignore"):
            return np.exp(fitted) * smear

    def interval(self, fitted, spread, smear):
        return np.exp(fitted) * smear, np.exp(fitted - spread), np.exp(fitted + spread)


# A fold's smearing sum Σ wᵢ·exp(rᵢ − Δa − δ·uᵢ) over its training rows (rᵢ the full fit's log
# residual; Δa, δ how far the fold's intercept and slope are from the full fit's; |uᵢ| ≤ 1) comes
# from the Taylor series of exp(−δ·uᵢ) over per-block moments Σ wᵢ·exp(rᵢ)·uᵢᵏ, k ≤ TAYLOR_TERMS.
# For |δ| ≤ TAYLOR_REACH the terms left out are below 0.75¹⁷/17!·e^0.75 ≈ 4.5e-17 of Σ wᵢ·exp(rᵢ),
# and the sum is at least e^-0.75 of that: under 1e-16 relative, i.e. rounding (the terms'
# alternating signs cost at most a factor e^(2|δ|) ≤ 4.5 in rounding).  A fold further away
# sums its exponentials row by row.
TAYLOR_TERMS = 16  # _growth_moments writes out its 17 accumulators: change both together
TAYLOR_REACH = 0.75


@compiled
def _growth_moments(u, g, w, weighted, bounds, out, block_w):
    """Per block b of one series (rows ``bounds[b]:bounds[b + 1]``): ``out[b, k]`` = Σ wᵢ·gᵢ·uᵢᵏ,
    k ≤ 16, in scalar accumulators (registers), and ``block_w[b]`` = Σ wᵢ."""
    for b in range(len(bounds) - 1):
        m0 = m1 = m2 = m3 = m4 = m5 = m6 = m7 = m8 = m9 = m10 = m11 = m12 = m13 = m14 = m15 = m16 = 0.0
        total_w = 0.0
        for i in range(bounds[b], bounds[b + 1]):
            wi = w[i] if weighted else 1.0
            total_w += wi
            t0 = wi * g[i]
            u1 = u[i]
            u2 = u1 * u1
            u4 = u2 * u2
            u8 = u4 * u4
            t1 = t0 * u1
            t2 = t0 * u2
            t3 = t1 * u2
            t4 = t0 * u4
            t5 = t1 * u4
            t6 = t2 * u4
            t7 = t3 * u4
            m0 += t0
            m1 += t1
            m2 += t2
            m3 += t3
            m4 += t4
            m5 += t5
            m6 += t6
            m7 += t7
            m8 += t0 * u8
            m9 += t1 * u8
            m10 += t2 * u8
            m11 += t3 * u8
            m12 += t4 * u8
            m13 += t5 * u8
            m14 += t6 * u8
            m15 += t7 * u8
            m16 += t4 * (u4 * u8)
        sums = (m0, m1, m2, m3, m4, m5, m6, m7, m8, m9, m10, m11, m12, m13, m14, m15, m16)
        for k in range(TAYLOR_TERMS + 1):
            out[b, k] = sums[k]
        block_w[b] = total_w


@compiled
def log_residuals(u, z, bounds, held_out, a, e, out):
    """Log-scale residuals zᵢ − a − e·uᵢ of row i of series s: ``out[0, i]`` under the full fit
    (column F of ``a``, ``e``), ``out[1, i]`` under the fit of the fold holding row i out (the full
    fit for rows no fold holds out)."""
    n_folds = len(held_out)
    for s in range(bounds.shape[0]):
        for i in range(bounds[s, 0], bounds[s, -1]):
            r = z[i] - a[s, n_folds] - e[s, n_folds] * u[i]
            out[0, i] = r
            out[1, i] = r
        for f in range(n_folds):
            hb = held_out[f]
            for i in range(bounds[s, hb], bounds[s, hb + 1]):
                out[1, i] = z[i] - a[s, f] - e[s, f] * u[i]


@compiled
def volume_errors(u, z, volume, w, bounds, held_out, cumulative, a, e, growth, smear, sse_full, sse_test):
    """Volume-scale errors of the ln-volume fits, with Duan's smearing factor per fit.

    ``growth[0, i]`` = exp(log residual of row i under the full fit), ``growth[1, i]`` = the same
    under the fit that holds row i out.  A fit's smearing factor is the weighted mean of its
    growths over its training rows; its prediction at row i is volumeᵢ / growth × smear.
    """
    n_folds = len(held_out)
    n_blocks = bounds.shape[1] - 1
    weighted = len(w) > 0
    moments = np.zeros((n_blocks, TAYLOR_TERMS + 1))
    block_w = np.zeros(n_blocks)
    train = np.zeros(TAYLOR_TERMS + 1)
    for s in range(bounds.shape[0]):
        _growth_moments(u, growth[0], w, weighted, bounds[s], moments, block_w)
        spread = 0.0
        weight = 0.0
        for b in range(n_blocks):
            spread += moments[b, 0]
            weight += block_w[b]
        full = spread / weight if weight > 0 else 1.0
        smear[s] = full
        total = 0.0
        for i in range(bounds[s, 0], bounds[s, -1]):
            wi = w[i] if weighted else 1.0
            r = volume[i] - volume[i] / growth[0, i] * full
            total += wi * r * r
        sse_full[s] = total
        for f in range(n_folds):
            shift = a[s, f] - a[s, n_folds]
            tilt = e[s, f] - e[s, n_folds]
            near = abs(tilt) <= TAYLOR_REACH
            train[:] = 0.0
            weight = 0.0
            spread = 0.0
            for b in range(n_blocks):
                if not trains_on(f, b, held_out, cumulative):
                    continue
                weight += block_w[b]
                if near:
                    for k in range(TAYLOR_TERMS + 1):
                        train[k] += moments[b, k]
                else:
                    for i in range(bounds[s, b], bounds[s, b + 1]):
                        wi = w[i] if weighted else 1.0
                        spread += wi * np.exp(z[i] - a[s, f] - e[s, f] * u[i])
            if near:
                coef = 1.0
                spread = train[0]
                for k in range(1, TAYLOR_TERMS + 1):
                    coef *= -tilt / k
                    spread += coef * train[k]
                spread *= np.exp(-shift)
            fit_smear = spread / weight if weight > 0 else 1.0
            hb = held_out[f]
            total = 0.0
            for i in range(bounds[s, hb], bounds[s, hb + 1]):
                wi = w[i] if weighted else 1.0
                r = volume[i] - volume[i] / growth[1, i] * fit_smear
                total += wi * r * r
            sse_test[s, f] = total


@compiled
def loo_smearing(x, r, g, w, offsets, lower, scale, press, plain, out):
    """``out[i]``: Duan's smearing factor of the fit without row i, the weighted mean of exp(r_j⁽⁻ⁱ⁾) over
    the series' other rows j.

    ``x`` (P, N) the design's columns (1, the centred controls, the mapped regressor last), ``r`` the full
    fit's log residuals, ``g`` = exp(r), ``lower``, ``scale`` (S, P, P), (S, P) its scaled Cholesky factor,
    ``press`` the leave-one-out log residuals.  Without row i the coefficients move by −(XᵀWX)⁻¹xᵢ·cᵢ,
    cᵢ = wᵢ·pressᵢ, so r_j⁽⁻ⁱ⁾ = r_j + cᵢ·x_jᵀvᵢ, vᵢ = (XᵀWX)⁻¹xᵢ (two triangular solves).  With the
    regressor alone (P = 2) the sum over j is Σ w_j·g_j·exp(δ·u_j)·exp(cᵢ·vᵢ₀), δ = cᵢ·vᵢ₁: the Taylor
    series over the series' moments Σ w·g·uᵏ (as the folds' smearing, ``TAYLOR_REACH``) less row i's
    own term, summed row by row where δ is larger or row i's term is half the sum or more.  ``plain``
    rows take the full fit's other rows (a control's lone row; a row of leverage 1).
    """
    weighted = len(w) > 0
    p = x.shape[0]
    moments = np.zeros((1, TAYLOR_TERMS + 1))
    total_w = np.zeros(1)
    bounds = np.zeros(2, dtype=np.int64)
    v = np.zeros(p)
    for s in range(len(offsets) - 1):
        lo, hi = offsets[s], offsets[s + 1]
        bounds[0], bounds[1] = lo, hi
        _growth_moments(x[p - 1], g, w, weighted, bounds, moments, total_w)
        for i in range(lo, hi):
            wi = w[i] if weighted else 1.0
            others = total_w[0] - wi
            if others <= 0:
                out[i] = np.nan
                continue
            if plain[i]:
                out[i] = (moments[0, 0] - wi * g[i]) / others
                continue
            for k in range(p):  # L·y = D·xᵢ, then Lᵀ·y' = y; vᵢ = D·y'
                acc = scale[s, k] * x[k, i]
                for m in range(k):
                    acc -= lower[s, k, m] * v[m]
                v[k] = acc / lower[s, k, k]
            for k in range(p - 1, -1, -1):
                acc = v[k]
                for m in range(k + 1, p):
                    acc -= lower[s, m, k] * v[m]
                v[k] = acc / lower[s, k, k]
            ci = wi * press[i]
            for k in range(p):
                v[k] *= scale[s, k] * ci
            if p == 2 and abs(v[1]) <= TAYLOR_REACH:
                coef = 1.0
                spread = moments[0, 0]
                for k in range(1, TAYLOR_TERMS + 1):
                    coef *= v[1] / k
                    spread += coef * moments[0, k]
                spread *= np.exp(v[0])
                own = wi * np.exp(r[i] + v[0] + v[1] * x[1, i])
                if own < 0.5 * spread:
                    out[i] = (spread - own) / others
                    continue
            spread = 0.0
            for j in range(lo, hi):
                if j != i:
                    shift = r[j]
                    for k in range(p):
                        shift += x[k, j] * v[k]
                    spread += (w[j] if weighted else 1.0) * np.exp(shift)
            out[i] = spread / others
