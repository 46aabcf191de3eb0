"""Polynomials in price: volume = Σ cₖ·tᵏ, degree 0 to 5, t the price mapped onto [-1, 1].

All degrees come from one factorisation per fit (``polyfit``): the leading
block of a Cholesky factor is the factor of the leading block.  Judged and
reported in volume units directly (no smearing).  Leave-one-out errors are
exact PRESS residuals eᵢ / (1 − hᵢᵢ) (``loo``).
"""
from __future__ import annotations

import numpy as np

from ...compiled import compiled
from ..basis import horner, width
from ..loo import loo_residuals
from ..polyfit import fit_family
from ..scores import along_folds
from .base import Candidate, Family, Fitted


class Polynomial(Family):
    name = "poly"
    regressor = "price"

    def candidates(self, settings) -> tuple[Candidate, ...]:
        return tuple(Candidate(f"poly{d}", self.name, d, d + 1) for d in settings.degrees)

    def fit(self, ch, candidates) -> Fitted:
        fit = fit_family(ch.t, ch.y, ch.weight, ch.lay, tuple(c.degree for c in candidates),
                         controls=None if ch.controls is None else ch.controls.z)
        errors, held_ok = ch.scheme.held_out(self, (ch, fit))
        coef = fit.coef[:, -1].copy()  # centred volume's fit; the mean goes back into the constant
        coef[:, :, 0] += ch.ybar[:, None]
        no_smear = np.full(fit.sse_full.shape, np.nan)
        mid, half = ch.window
        return Fitted(coef=coef, mid=mid, half=half, fit_ok=fit.ok[:, -1], held_ok=held_ok, held_out=errors,
                      sse=fit.sse_full, fit_sse=fit.sse_full, smear=no_smear, unserved=None, lower=fit.lower,
                      scale=fit.scale, rows=ch.t, target=ch.volume, row_coef=coef,
                      gamma=None if fit.gamma is None else fit.gamma[:, -1], tie=fit.tie)

    def fold_errors(self, work):
        ch, fit = work
        return fit.sse_test, along_folds(fit.ok[:, :-1], np.logical_and)

    def row_errors(self, work):
        ch, fit = work
        resid, defined = loo_residuals(ch.t, ch.y, ch.weight, ch.offsets, fit, ch.controls)
        return resid.T ** 2, along_folds(fit.ok[:, :-1], np.logical_and) & defined.T

    def response(self, volume):
        return volume

    def volume(self, fitted, smear):
        return fitted

    def interval(self, fitted, spread, smear):
        return fitted, fitted - spread, fitted + spread

    def slope(self, fitted_t, volume, half, price):
        return fitted_t / width(half)

    def elasticity(self, fitted_t, volume, half, price):
        return self.slope(fitted_t, volume, half, price) * price / volume

    def best_revenue(self, coef, mid, half, smear, lo, hi) -> np.ndarray:
        """Grid search over the price window, then safeguarded Newton steps (``revenue_peak``)."""
        t = np.empty(len(mid))
        revenue_peak(np.ascontiguousarray(coef, dtype=np.float64), mid.astype(np.float64),
                     half.astype(np.float64), 65, t)
        return mid + half * t


@compiled
def revenue_peak(coef, mid, half, grid, out):
    """``out[s]``: the t in [-1, 1] maximising (mid + half·t) × Σ coef[s, k]·tᵏ.

    A grid of ``grid`` points finds the best cell (first maximum); Newton steps
    on d(revenue)/dt, kept inside the neighbouring cells and taken only when
    they raise revenue, make the optimum exact for a quadratic revenue
    (linear demand) and accurate to round-off for smooth ones.
    """
    step = 2.0 / (grid - 1)
    p = coef.shape[1]
    for s in range(coef.shape[0]):
        best = -np.inf
        t = -1.0
        for g in range(grid):
            tg = -1.0 + g * step if g < grid - 1 else 1.0
            revenue = (mid[s] + half[s] * tg) * horner(coef, s, p, 0, tg)
            if revenue > best:
                best = revenue
                t = tg
        lo = max(t - step, -1.0)
        hi = min(t + step, 1.0)
        for _ in range(8):
            price = mid[s] + half[s] * t
            v = horner(coef, s, p, 0, t)
            v1 = horner(coef, s, p, 1, t)
            v2 = horner(coef, s, p, 2, t)
            grad = half[s] * v + price * v1
            curv = 2 * half[s] * v1 + price * v2
            candidate = min(max(t - grad / curv, lo), hi)
            if curv < 0 and np.isfinite(candidate):
                if (mid[s] + half[s] * candidate) * horner(coef, s, p, 0, candidate) >= price * v:
                    t = candidate
        out[s] = t
